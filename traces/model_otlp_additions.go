package traces

import "errors"

// ErrSpanRepair means span data needed a repair (orphan span, duplicate
// span ID, parent cycle, negative duration, missing timestamp, clock skew,
// invalid ID) and Options.Strict forbids repairs. It is wrapped in a
// *ParseError naming the input and line of the span concerned.
var ErrSpanRepair = errors.New("span data needs repair (strict mode)")
