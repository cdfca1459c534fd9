// Package agree computes the reliability of a hand scan as pure functions
// over label tables: agreement between scanners (percent agreement, Cohen's
// and Fleiss' kappa, Krippendorff's alpha, with bootstrap intervals),
// scanning efficiency from double scanning (capture–recapture), consensus
// labels (majority vote, Dawid–Skene), spatial agreement of marks, and the
// efficiency and purity of an automated selection against the consensus.
//
// Nothing here touches files or databases. Undefined statistics (a kappa
// whose chance agreement is 1, an estimate from zero counts) are NaN, never
// 0 or 1; callers print them as "undefined" or JSON null.
package agree

import (
	"errors"
	"fmt"
	"math"
	"slices"
	"strconv"
	"strings"
)

// Missing marks an item a rater did not rate.
const Missing = -1

// Rating is one rater's label for one item. An empty Label is a missing
// rating, the same as an absent row.
type Rating struct {
	Item, Rater, Label string
}

// Table is a label table: items × raters, each cell a category index into
// Categories or Missing. Categories are in level order (the ordinal scale),
// and Values holds their numbers when every category parses as one.
type Table struct {
	Items      []string
	Raters     []string
	Categories []string
	Values     []float64 // nil unless every category is numeric
	Codes      []int32   // Codes[i*len(Raters)+r]
}

// At returns rater r's category for item i, or Missing.
func (t *Table) At(i, r int) int { return int(t.Codes[i*len(t.Raters)+r]) }

// Category returns the index of a category name, or -1.
func (t *Table) Category(name string) int { return slices.Index(t.Categories, name) }

// Numeric reports whether every category is a number (needed for the
// interval and ratio metrics).
func (t *Table) Numeric() bool { return t.Values != nil }

// Errors a caller can branch on.
var (
	ErrEmpty          = errors.New("no ratings")
	ErrSingleCategory = errors.New("only one category is used: agreement is undefined")
)

// NewTable builds a table from ratings. Items and raters keep their order of
// first appearance. With a non-empty order the categories are exactly that
// declared scale (levels nobody used still count, so weighted statistics
// follow the full scale) and a label outside it is an error; without one,
// numeric labels are ordered by value and others alphabetically.
func NewTable(ratings []Rating, order []string) (*Table, error) {
	t := &Table{}
	itemIx := map[string]int{}
	raterIx := map[string]int{}
	catIx := map[string]int{}
	rated := map[string]bool{}
	for _, r := range ratings {
		if r.Item == "" || r.Rater == "" {
			return nil, fmt.Errorf("rating %q by %q: empty item or rater name", r.Item, r.Rater)
		}
		if _, ok := itemIx[r.Item]; !ok {
			itemIx[r.Item] = len(t.Items)
			t.Items = append(t.Items, r.Item)
		}
		if _, ok := raterIx[r.Rater]; !ok {
			raterIx[r.Rater] = len(t.Raters)
			t.Raters = append(t.Raters, r.Rater)
		}
		if r.Label != "" {
			rated[r.Rater] = true
			if _, ok := catIx[r.Label]; !ok {
				catIx[r.Label] = len(catIx)
			}
		}
	}
	if len(t.Items) == 0 {
		return nil, ErrEmpty
	}
	for _, name := range t.Raters {
		if !rated[name] {
			return nil, fmt.Errorf("rater %q has no labels", name)
		}
	}
	if err := t.setCategories(catIx, order); err != nil {
		return nil, err
	}
	for c, name := range t.Categories {
		catIx[name] = c
	}
	nr := len(t.Raters)
	t.Codes = make([]int32, len(t.Items)*nr)
	for k := range t.Codes {
		t.Codes[k] = Missing
	}
	for _, r := range ratings {
		if r.Label == "" {
			continue
		}
		k := itemIx[r.Item]*nr + raterIx[r.Rater]
		c := int32(catIx[r.Label])
		if t.Codes[k] != Missing && t.Codes[k] != c {
			return nil, fmt.Errorf("item %q: rater %q gave two labels, %q and %q",
				r.Item, r.Rater, t.Categories[t.Codes[k]], r.Label)
		}
		t.Codes[k] = c
	}
	return t, nil
}

func (t *Table) setCategories(seen map[string]int, order []string) error {
	if len(order) > 0 {
		for i, c := range order {
			if c == "" || slices.Contains(order[:i], c) {
				return fmt.Errorf("category order %q: empty or repeated level %q", strings.Join(order, ","), c)
			}
		}
		for name := range seen {
			if !slices.Contains(order, name) {
				return fmt.Errorf("label %q is not in the declared order %s", name, strings.Join(order, ","))
			}
		}
		t.Categories = slices.Clone(order)
	} else {
		for name := range seen {
			t.Categories = append(t.Categories, name)
		}
		slices.Sort(t.Categories)
	}
	vals := make([]float64, len(t.Categories))
	for i, c := range t.Categories {
		v, err := strconv.ParseFloat(strings.TrimSpace(c), 64)
		if err != nil || math.IsNaN(v) || math.IsInf(v, 0) {
			vals = nil
			break
		}
		vals[i] = v
	}
	t.Values = vals
	if vals != nil && len(order) == 0 {
		idx := make([]int, len(vals))
		for i := range idx {
			idx[i] = i
		}
		slices.SortStableFunc(idx, func(a, b int) int { return cmpFloat(vals[a], vals[b]) })
		cats, vs := make([]string, len(idx)), make([]float64, len(idx))
		for i, j := range idx {
			cats[i], vs[i] = t.Categories[j], vals[j]
		}
		t.Categories, t.Values = cats, vs
	}
	return nil
}

func cmpFloat(a, b float64) int {
	switch {
	case a < b:
		return -1
	case a > b:
		return 1
	}
	return 0
}

// Used reports how many distinct categories appear in the table.
func (t *Table) Used() int {
	seen := make([]bool, len(t.Categories))
	n := 0
	for _, c := range t.Codes {
		if c != Missing && !seen[c] {
			seen[c] = true
			n++
		}
	}
	return n
}

// CheckVariation returns ErrSingleCategory when fewer than two categories
// are used: every agreement coefficient is then 0/0.
func (t *Table) CheckVariation() error {
	if t.Used() < 2 {
		return ErrSingleCategory
	}
	return nil
}

// Rater returns the index of a rater name, or -1.
func (t *Table) Rater(name string) int { return slices.Index(t.Raters, name) }
