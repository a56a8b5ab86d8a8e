package traces

// RequestChecker decodes single OTLP trace export requests exactly as
// the readers of a capture will (one decoder of the pipeline), so that a
// receiver can refuse what would not read and count what would be
// skipped before it stores and acknowledges a request. It is not safe
// for concurrent use: use one per goroutine.
type RequestChecker struct {
	d     *decoder
	spare chan []spanRec
}

// CheckResult is what a request holds: spans read, spans that will be
// skipped (invalid trace or span IDs) and the first reason why.
type CheckResult struct {
	Spans    int
	Rejected int
	Message  string
}

// NewRequestChecker returns a checker reading with opts.
func NewRequestChecker(opts Options) *RequestChecker {
	spare := make(chan []spanRec, 1)
	d := newDecoder(NewSpanCollector(opts), "request", spare)
	d.ids = &globalIDs{}
	return &RequestChecker{d: d, spare: spare}
}

// Check decodes one request: OTLP/JSON when json is set, else binary
// protobuf. An error (a *ParseError) means the request is malformed.
func (k *RequestChecker) Check(data []byte, json bool) (CheckResult, error) {
	b := k.d.run(&job{data: data, proto: !json, doc: json, line: 1, col: 1})
	if b.err != nil {
		return CheckResult{}, b.err
	}
	res := CheckResult{Spans: len(b.spans)}
	for _, w := range b.warnings {
		if w.Kind == WarnInvalidID {
			if res.Rejected++; res.Message == "" {
				res.Message = w.Message
			}
		}
	}
	res.Spans += res.Rejected
	select {
	case k.spare <- b.spans[:0]:
	default:
	}
	return res, nil
}
