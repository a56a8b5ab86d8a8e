package attribute

import (
	"bytes"
	"encoding/json"
	"fmt"
	"io"
	"regexp"
	"sort"
	"strings"
)

// Unassigned names the domain of root causes that match no domain.
const Unassigned = "(unassigned)"

// Domain is one business domain: a name and the function-name patterns
// of the code that belongs to it.
type Domain struct {
	Name string `json:"name"`
	// Prefixes match function names that start with them.
	Prefixes []string `json:"prefixes,omitempty"`
	// Regexps match function names (RE2, unanchored).
	Regexps []string `json:"regexps,omitempty"`

	res []*regexp.Regexp
}

// Domains maps root causes to business domains; the first domain with a
// matching pattern wins, in file order.
type Domains struct {
	List []Domain `json:"domains"`
	File string   `json:"-"`
}

// DomainTotal is the cost charged to the root causes of one domain.
type DomainTotal struct {
	Domain   string  `json:"domain"`
	Cost     int64   `json:"cost"`
	Database int64   `json:"database"`
	Network  int64   `json:"network"`
	Share    float64 `json:"share"`
	Causes   int     `json:"causes"`
}

// ParseDomainsFile reads a domains file (JSON; schema in the README):
//
//	{"domains": [
//	  {"name": "checkout", "prefixes": ["example.com/shop/checkout."]},
//	  {"name": "catalog", "regexps": ["catalog\\.\\(\\*Repo\\)"]}]}
//
// Errors carry the line and column of the offending domain or token.
func ParseDomainsFile(name string, r io.Reader) (*Domains, error) {
	var d Domains
	data, posErr, err := decodeFile(name, r, &d)
	if err != nil {
		return nil, err
	}
	offsets := arrayOffsets(data, "domains", len(d.List))
	seen := map[string]bool{}
	for i := range d.List {
		dm := &d.List[i]
		switch {
		case strings.TrimSpace(dm.Name) == "":
			return nil, posErr(offsets[i], fmt.Errorf("domain %d has no name", i+1))
		case seen[dm.Name]:
			return nil, posErr(offsets[i], fmt.Errorf("domain %q is defined twice", dm.Name))
		case len(dm.Prefixes) == 0 && len(dm.Regexps) == 0:
			return nil, posErr(offsets[i], fmt.Errorf("domain %q needs \"prefixes\" or \"regexps\"", dm.Name))
		}
		seen[dm.Name] = true
		for _, p := range dm.Regexps {
			re, err := regexp.Compile(p)
			if err != nil {
				return nil, posErr(offsets[i], fmt.Errorf("domain %q: bad regexp: %w", dm.Name, err))
			}
			dm.res = append(dm.res, re)
		}
	}
	d.File = name
	return &d, nil
}

// Of returns the domain of a function name, or Unassigned.
func (d *Domains) Of(function string) string {
	for i := range d.List {
		dm := &d.List[i]
		for _, p := range dm.Prefixes {
			if strings.HasPrefix(function, p) {
				return dm.Name
			}
		}
		for _, re := range dm.res {
			if re.MatchString(function) {
				return dm.Name
			}
		}
	}
	return Unassigned
}

// Rollup assigns every root cause of r to a domain and sets r.Domains,
// sorted by cost (descending), then name; Unassigned is listed like any
// other domain. A "no application frame" bucket is always Unassigned.
func (d *Domains) Rollup(r *Result) {
	totals := map[string]*DomainTotal{}
	for _, c := range r.Causes {
		c.Domain = Unassigned
		if !c.NoAppFrame {
			c.Domain = d.Of(c.Function)
		}
		t := totals[c.Domain]
		if t == nil {
			t = &DomainTotal{Domain: c.Domain}
			totals[c.Domain] = t
		}
		t.Cost += c.Cost
		t.Database += c.Database
		t.Network += c.Network
		t.Share += c.Share
		t.Causes++
	}
	r.Domains = r.Domains[:0]
	for _, t := range totals {
		r.Domains = append(r.Domains, *t)
	}
	sort.Slice(r.Domains, func(i, j int) bool {
		a, b := r.Domains[i], r.Domains[j]
		if a.Cost != b.Cost {
			return a.Cost > b.Cost
		}
		return a.Domain < b.Domain
	})
	r.DomainsFile = d.File
}

// arrayOffsets finds the byte offset where each element of the top-level
// array key starts, by walking the token stream.
func arrayOffsets(data []byte, key string, n int) []int64 {
	offs := make([]int64, n)
	dec := json.NewDecoder(bytes.NewReader(data))
	if t, err := dec.Token(); err != nil || t != json.Delim('{') {
		return offs
	}
	for dec.More() {
		k, err := dec.Token()
		if err != nil {
			return offs
		}
		if k != key {
			var skip json.RawMessage
			if dec.Decode(&skip) != nil {
				return offs
			}
			continue
		}
		if t, err := dec.Token(); err != nil || t != json.Delim('[') {
			return offs
		}
		for i := 0; dec.More() && i < n; i++ {
			start := dec.InputOffset()
			for start < int64(len(data)) && strings.IndexByte(" \t\r\n,", data[start]) >= 0 {
				start++
			}
			offs[i] = start
			var skip json.RawMessage
			if dec.Decode(&skip) != nil {
				return offs
			}
		}
		return offs
	}
	return offs
}
