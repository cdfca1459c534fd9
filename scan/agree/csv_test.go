package agree

import (
	"strings"
	"testing"
)

func TestReadRatingsCSV(t *testing.T) {
	rs, err := ReadRatingsCSV(strings.NewReader("label,item,rater,time\ncc,1,ana,12.5\n,1,ben,\nnc,2,ana,3\n"), "x.csv")
	if err != nil {
		t.Fatal(err)
	}
	if len(rs) != 3 || rs[0].Item != "1" || rs[0].Rater != "ana" || rs[0].Label != "cc" || rs[0].Seconds != 12.5 || rs[2].Line != 4 {
		t.Errorf("got %+v", rs)
	}
	if rs[1].Label != "" {
		t.Errorf("empty label read as %q", rs[1].Label)
	}
}

func TestReadRatingsCSVErrors(t *testing.T) {
	for _, tc := range []struct{ name, in, want string }{
		{"empty", "", "empty file"},
		{"unknown column", "item,rater,label,colour\n1,a,x,red\n", `unknown column "colour"`},
		{"missing column", "item,rater\n1,a\n", `missing column "label"`},
		{"duplicate column", "item,rater,label,label\n1,a,x,y\n", "appears twice"},
		{"ragged", "item,rater,label\n1,a\n", "wrong number of fields"},
		{"bad time", "item,rater,label,time\n1,a,x,soon\n", `x.csv:2: time "soon"`},
		{"negative time", "item,rater,label,time\n1,a,x,-3\n", "x.csv:2: time"},
		{"empty rater", "item,rater,label\n1,,x\n", "x.csv:2: empty item or rater"},
		{"header only", "item,rater,label\n", "no ratings"},
	} {
		t.Run(tc.name, func(t *testing.T) {
			_, err := ReadRatingsCSV(strings.NewReader(tc.in), "x.csv")
			if err == nil || !strings.Contains(err.Error(), tc.want) {
				t.Errorf("err = %v, want it to contain %q", err, tc.want)
			}
		})
	}
}

func FuzzReadRatingsCSV(f *testing.F) {
	for _, s := range []string{
		"item,rater,label\n1,a,x\n2,b,y\n",
		"item,rater,label,time\n1,a,x,3\n1,b,,\n",
		"label,rater,item\n\"q,r\",a,1\n",
		"item,rater\n",
		"",
	} {
		f.Add(s)
	}
	f.Fuzz(func(t *testing.T, s string) {
		rs, err := ReadRatingsCSV(strings.NewReader(s), "fuzz.csv")
		if err != nil {
			return
		}
		for _, r := range rs {
			if r.Item == "" || r.Rater == "" {
				t.Fatalf("accepted an empty item or rater: %+v", r)
			}
		}
		// Whatever parses must build a table or fail with an error, never panic.
		if tab, err := NewTable(Ratings(rs), nil); err == nil {
			_ = Summarize(tab, nil)
		}
	})
}
