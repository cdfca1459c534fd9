package agree

import "encoding/binary"

// patterns is a table compressed to its distinct rating patterns (one row of
// codes per pattern) with the items of each pattern. Every statistic here is
// a weighted sum over patterns, so a large scan with few raters and classes
// (100,000 events, 3 scanners, 8 classes: at most 9³ patterns) costs little,
// and a bootstrap resample is just a new weight vector.
type patterns struct {
	nr    int
	codes []int32   // codes[p*nr+r]
	count []float64 // items per pattern
	of    []int32   // pattern of each item
}

func compress(t *Table) *patterns {
	nr := len(t.Raters)
	p := &patterns{nr: nr, of: make([]int32, len(t.Items))}
	index := make(map[string]int32)
	key := make([]byte, 4*nr)
	for i := range t.Items {
		row := t.Codes[i*nr : (i+1)*nr]
		for r, c := range row {
			binary.LittleEndian.PutUint32(key[4*r:], uint32(c))
		}
		k, ok := index[string(key)] // no allocation on lookup
		if !ok {
			k = int32(len(p.count))
			index[string(key)] = k
			p.codes = append(p.codes, row...)
			p.count = append(p.count, 0)
		}
		p.count[k]++
		p.of[i] = k
	}
	return p
}

func (p *patterns) n() int             { return len(p.count) }
func (p *patterns) row(k int) []int32  { return p.codes[k*p.nr : (k+1)*p.nr] }
func (p *patterns) at(k, r int) int    { return int(p.codes[k*p.nr+r]) }
func (p *patterns) weights() []float64 { return p.count }
