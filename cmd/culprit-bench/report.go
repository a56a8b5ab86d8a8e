package main

import (
	"fmt"
	"io"
	"math"
	"slices"
	"strings"
	"text/tabwriter"
	"time"
)

// report is everything culprit-bench prints.
type report struct {
	GOOS, GOARCH, GoVersion string
	NumCPU                  int
	Runs                    int
	Inputs                  []inputInfo
	Phases                  []*phaseResult
	Ratios                  []ratio
	// ParentRSS is culprit-bench's own peak RSS in bytes (-1 if unknown):
	// on Linux the floor of every child's reading.
	ParentRSS int64
	// Notes are remarks printed under the ratios.
	Notes []string
}

// ratio is one target check. Raw is end to end; Net subtracts the
// baselines. Either is NaN when it cannot be computed.
type ratio struct {
	Name     string
	Raw, Net float64
	// Target is the bound, 0 for a ratio printed for information; AtMost
	// says whether the bound is an upper one.
	Target float64
	AtMost bool
}

// met reports whether the raw value meets the target: "yes", "no", or ""
// when there is no target or no value.
func (r ratio) met() string {
	switch {
	case r.Target == 0 || math.IsNaN(r.Raw):
		return ""
	case r.AtMost == (r.Raw <= r.Target):
		return "yes"
	default:
		return "no"
	}
}

func (r ratio) target() string {
	switch {
	case r.Target == 0:
		return "(info)"
	case r.AtMost:
		return fmt.Sprintf("≤ %g", r.Target)
	default:
		return fmt.Sprintf("≥ %g", r.Target)
	}
}

// phase returns the result of the named phase, or nil.
func (rep *report) phase(name string) *phaseResult {
	for _, p := range rep.Phases {
		if p.Name == name {
			return p
		}
	}
	return nil
}

// input returns the input with the given role, or nil.
func (rep *report) input(role string) *inputInfo {
	for i := range rep.Inputs {
		if rep.Inputs[i].Role == role {
			return &rep.Inputs[i]
		}
	}
	return nil
}

// computeRatios fills rep.Ratios (and rep.Notes) from the phase results.
func (rep *report) computeRatios() {
	baseSelf := rep.phase(phaseBaselineSelf)
	baseCulprit := rep.phase(phaseBaselineCulprit)
	timeRatio := func(name string, num, numBase, den, denBase *phaseResult, target float64, atMost bool) {
		raw := seconds(num.medianWall()) / seconds(den.medianWall())
		net := (seconds(num.medianWall()) - seconds(numBase.medianWall())) /
			(seconds(den.medianWall()) - seconds(denBase.medianWall()))
		rep.Ratios = append(rep.Ratios, ratio{Name: name, Raw: raw, Net: positive(net), Target: target, AtMost: atMost})
	}
	perSpan := func(name string, p *phaseResult, spans int64) {
		peak, base := p.peakRSS(), baseCulprit.peakRSS()
		r := ratio{Name: name, Raw: math.NaN(), Net: math.NaN(), Target: 150, AtMost: true}
		if peak > 0 && spans > 0 {
			r.Raw = float64(peak) / float64(spans)
			if base > 0 {
				r.Net = positive(float64(peak-base) / float64(spans))
			}
		}
		rep.Ratios = append(rep.Ratios, r)
	}
	if parse, rank := rep.phase(phasePprofParse), rep.phase(phasePprofRank); parse != nil && rank != nil {
		timeRatio("pprof: rank ÷ profile.Parse, time", rank, baseCulprit, parse, baseSelf, 1.3, true)
	}
	ref, rank := rep.phase(phaseOTLPProtojson), rep.phase(phaseOTLPRank)
	if ref != nil && rank != nil {
		timeRatio("OTLP: protojson ÷ rank, time", ref, baseSelf, rank, baseCulprit, 10, false)
		spans := rep.input("spans").Spans
		if ref.Spans > 0 && ref.Spans != spans {
			rep.Notes = append(rep.Notes, fmt.Sprintf(
				"the spans file has %d \"spanId\" keys but protojson decoded %d spans; using %d",
				spans, ref.Spans, ref.Spans))
			spans = ref.Spans
		}
		perSpan("OTLP: rank peak RSS ÷ spans, bytes", rank, spans)
	}
	if big := rep.phase(phaseOTLPRank10x); big != nil && rank != nil {
		small, large := rep.input("spans").Spans, rep.input("spans-big").Spans
		timeRatio("OTLP: rank 10×N ÷ rank N, time", big, baseCulprit, rank, baseCulprit, 11, true)
		if small > 0 && large != 10*small {
			rep.Notes = append(rep.Notes, fmt.Sprintf(
				"-spans-big has %.2f× the spans of -spans, not 10×", float64(large)/float64(small)))
		}
		perSpan("OTLP: rank 10×N peak RSS ÷ spans, bytes", big, large)
		r := ratio{Name: "OTLP: rank 10×N ÷ rank N, peak RSS", Raw: math.NaN(), Net: math.NaN()}
		if p, q, b := big.peakRSS(), rank.peakRSS(), baseCulprit.peakRSS(); p > 0 && q > 0 {
			r.Raw = float64(p) / float64(q)
			if b > 0 {
				r.Net = positive(float64(p-b) / float64(q-b))
			}
		}
		rep.Ratios = append(rep.Ratios, r)
	}
}

// positive returns x, or NaN when x is not a positive finite number (a
// net value whose baseline swallowed the measurement).
func positive(x float64) float64 {
	if x > 0 && !math.IsInf(x, 0) {
		return x
	}
	return math.NaN()
}

func seconds(d time.Duration) float64 { return d.Seconds() }

// medianWall returns the median wall time over the runs (the mean of the
// two middle ones for an even count).
func (p *phaseResult) medianWall() time.Duration { return median(p.Walls) }

// medianCPU returns the median user+system time over the runs.
func (p *phaseResult) medianCPU() time.Duration { return median(p.CPU) }

func median(ds []time.Duration) time.Duration {
	if len(ds) == 0 {
		return 0
	}
	s := slices.Clone(ds)
	slices.Sort(s)
	if len(s)%2 == 1 {
		return s[len(s)/2]
	}
	return (s[len(s)/2-1] + s[len(s)/2]) / 2
}

// peakRSS returns the highest peak RSS over the runs in bytes, or -1 if
// unknown.
func (p *phaseResult) peakRSS() int64 {
	peak := int64(-1)
	for _, r := range p.RSS {
		peak = max(peak, r)
	}
	return peak
}

// render writes the report as aligned text tables.
func (rep *report) render(w io.Writer) error {
	var b strings.Builder
	fmt.Fprintf(&b, "machine: %s/%s, %d CPUs, culprit-bench built with %s\n", rep.GOOS, rep.GOARCH, rep.NumCPU, rep.GoVersion)
	if p := rep.phase(phaseBaselineCulprit); p != nil && p.Decoded != "" {
		fmt.Fprintf(&b, "culprit: %s\n", p.Decoded)
	}
	fmt.Fprintf(&b, "runs: %d per phase; wall = median, peak RSS = highest; net = minus the baseline of the same binary\n", rep.Runs)
	fmt.Fprintf(&b, "culprit-bench's own peak RSS (the floor of every child's on Linux): %s\n\n", formatBytes(rep.ParentRSS))

	tw := tabwriter.NewWriter(&b, 0, 0, 2, ' ', 0)
	fmt.Fprintln(tw, "input\tbytes\tspans (\"spanId\" keys)\tfile")
	for _, in := range rep.Inputs {
		spans := "-"
		if in.Role != "profile" {
			spans = fmt.Sprint(in.Spans)
		}
		fmt.Fprintf(tw, "%s\t%s\t%s\t%s\n", in.Role, formatBytes(in.Bytes), spans, in.Path)
	}
	if err := tw.Flush(); err != nil {
		return err
	}
	b.WriteString("\n")

	baseline := map[bool]*phaseResult{true: rep.phase(phaseBaselineSelf), false: rep.phase(phaseBaselineCulprit)}
	tw = tabwriter.NewWriter(&b, 0, 0, 2, ' ', tabwriter.AlignRight)
	fmt.Fprintln(tw, "phase\twall\tmin\tmax\tnet wall\tCPU÷wall\tpeak RSS\tnet RSS\t decoded")
	for _, p := range rep.Phases {
		netWall, netRSS := "-", "-"
		if !strings.HasPrefix(p.Name, "baseline-") {
			base := baseline[isChildPhase(p.Name)]
			netWall = formatSeconds(p.medianWall() - base.medianWall())
			if p.peakRSS() > 0 && base.peakRSS() > 0 {
				netRSS = formatBytes(p.peakRSS() - base.peakRSS())
			}
		}
		par := "-"
		if w := p.medianWall(); w > 0 {
			par = fmt.Sprintf("%.2f", p.medianCPU().Seconds()/w.Seconds())
		}
		fmt.Fprintf(tw, "%s\t%s\t%s\t%s\t%s\t%s\t%s\t%s\t %s\n", p.Name,
			formatSeconds(p.medianWall()), formatSeconds(slices.Min(p.Walls)), formatSeconds(slices.Max(p.Walls)),
			netWall, par, formatBytes(p.peakRSS()), netRSS, p.Decoded)
	}
	if err := tw.Flush(); err != nil {
		return err
	}
	b.WriteString("\n")

	tw = tabwriter.NewWriter(&b, 0, 0, 2, ' ', 0)
	fmt.Fprintln(tw, "ratio\traw\tnet\ttarget\tmet (raw)")
	for _, r := range rep.Ratios {
		fmt.Fprintf(tw, "%s\t%s\t%s\t%s\t%s\n", r.Name, formatRatio(r.Raw), formatRatio(r.Net), r.target(), r.met())
	}
	if err := tw.Flush(); err != nil {
		return err
	}
	for _, n := range rep.Notes {
		fmt.Fprintf(&b, "note: %s\n", n)
	}
	_, err := io.WriteString(w, b.String())
	return err
}

func formatRatio(x float64) string {
	if math.IsNaN(x) {
		return "n/a"
	}
	if x >= 100 {
		return fmt.Sprintf("%.0f", x)
	}
	return fmt.Sprintf("%.2f", x)
}

func formatSeconds(d time.Duration) string { return fmt.Sprintf("%.3fs", d.Seconds()) }

// formatBytes prints a byte count in binary units; negative means unknown.
func formatBytes(n int64) string {
	switch {
	case n < 0:
		return "n/a"
	case n < 1<<10:
		return fmt.Sprintf("%d B", n)
	case n < 1<<20:
		return fmt.Sprintf("%.1f KiB", float64(n)/(1<<10))
	case n < 1<<30:
		return fmt.Sprintf("%.1f MiB", float64(n)/(1<<20))
	default:
		return fmt.Sprintf("%.2f GiB", float64(n)/(1<<30))
	}
}
