package agree

import (
	"encoding/csv"
	"errors"
	"fmt"
	"io"
	"math"
	"slices"
	"strconv"
	"strings"
)

// Columns of a labels CSV. item, rater and label are required; time
// (seconds the rater spent, a non-negative number or empty) is optional.
// Any other column is refused, so that a typo or a file of another kind is
// not read as something it is not.
var (
	requiredColumns = []string{"item", "rater", "label"}
	optionalColumns = []string{"time"}
)

// CSVRating is a rating read from a labels CSV with its line and time
// (NaN when the file has no time column or the cell is empty).
type CSVRating struct {
	Rating
	Line    int
	Seconds float64
}

// ReadRatingsCSV reads a labels CSV: a header with at least item, rater and
// label (any order), then one rating per line; an empty label is a missing
// rating. name (usually the file path) goes into errors.
func ReadRatingsCSV(r io.Reader, name string) ([]CSVRating, error) {
	cr := csv.NewReader(r)
	cr.ReuseRecord = true
	header, err := cr.Read()
	if errors.Is(err, io.EOF) {
		return nil, fmt.Errorf("%s: empty file, want a header with %s", name, strings.Join(requiredColumns, ","))
	}
	if err != nil {
		return nil, fmt.Errorf("%s: %w", name, err)
	}
	col := map[string]int{}
	for i, h := range header {
		h = strings.TrimSpace(strings.TrimPrefix(h, "\ufeff"))
		if !slices.Contains(requiredColumns, h) && !slices.Contains(optionalColumns, h) {
			return nil, fmt.Errorf("%s: unknown column %q (allowed: %s, optional %s)", name, h,
				strings.Join(requiredColumns, ", "), strings.Join(optionalColumns, ", "))
		}
		if _, dup := col[h]; dup {
			return nil, fmt.Errorf("%s: column %q appears twice", name, h)
		}
		col[h] = i
	}
	for _, c := range requiredColumns {
		if _, ok := col[c]; !ok {
			return nil, fmt.Errorf("%s: missing column %q (header must have %s)", name, c, strings.Join(requiredColumns, ", "))
		}
	}
	tcol, hasTime := col["time"]
	var out []CSVRating
	for {
		rec, err := cr.Read()
		if errors.Is(err, io.EOF) {
			break
		}
		if err != nil {
			return nil, fmt.Errorf("%s: %w", name, err)
		}
		line, _ := cr.FieldPos(0)
		cr := CSVRating{Line: line, Seconds: math.NaN(), Rating: Rating{
			Item:  strings.TrimSpace(rec[col["item"]]),
			Rater: strings.TrimSpace(rec[col["rater"]]),
			Label: strings.TrimSpace(rec[col["label"]]),
		}}
		if cr.Item == "" || cr.Rater == "" {
			return nil, fmt.Errorf("%s:%d: empty item or rater", name, line)
		}
		if hasTime {
			if s := strings.TrimSpace(rec[tcol]); s != "" {
				v, err := strconv.ParseFloat(s, 64)
				if err != nil || v < 0 || math.IsInf(v, 0) || math.IsNaN(v) {
					return nil, fmt.Errorf("%s:%d: time %q is not a number of seconds ≥ 0", name, line, s)
				}
				cr.Seconds = v
			}
		}
		out = append(out, cr)
	}
	if len(out) == 0 {
		return nil, fmt.Errorf("%s: no ratings after the header", name)
	}
	return out, nil
}

// Ratings drops the line numbers and times.
func Ratings(rs []CSVRating) []Rating {
	out := make([]Rating, len(rs))
	for i, r := range rs {
		out[i] = r.Rating
	}
	return out
}
