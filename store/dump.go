package store

import (
	"bytes"
	"context"
	"crypto/sha256"
	"encoding/hex"
	"encoding/json"
	"fmt"
	"slices"
	"time"

	"github.com/tpcscan/tpcscan/scan"
)

// CampaignDump is a whole campaign in a backend-neutral form, for copying a
// campaign from one store to another (tpcscan migrate). Row IDs inside it
// link passes to their revisions only; a store that loads a dump gives the
// rows its own IDs, so comparisons go by natural keys (campaign name,
// event ID, scanner, round, revision sequence).
type CampaignDump struct {
	Campaign  scan.Campaign
	Events    []EventDump      // in campaign order
	Passes    []PassDump       // every pass handed out
	Consensus []scan.Consensus // every stored consensus label, oldest first
	Resume    []ResumeState
}

// EventDump is an event with its assignment counters. How many passes were
// handed out is not kept: it is the number of the event's passes.
type EventDump struct {
	scan.CampaignEvent
	Needed        int // passes the event wants: K plus extra and replacement passes
	ExtraRound    int // round number of passes beyond K (1 until an extra pass is added)
	AdaptiveAdded int // extra passes added by the adaptive rule
}

// PassDump is a pass with all its revisions, oldest first.
type PassDump struct {
	Pass      scan.Pass
	Revisions []scan.Revision
}

// ResumeState is one scanner's saved place in a campaign.
type ResumeState struct {
	Scanner string
	State   []byte
	Updated time.Time
}

// Dumper is a store that can export a whole campaign.
type Dumper interface {
	Dump(ctx context.Context, campaignID int64) (CampaignDump, error)
}

// Loader is a store that can import a whole campaign in one transaction,
// keeping every revision and time stamp. It returns the new campaign's ID,
// or ErrConflict if a campaign of that name exists already.
type Loader interface {
	Load(ctx context.Context, d CampaignDump) (int64, error)
}

// TableSum is the row count and content checksum of one table of a dump.
type TableSum struct {
	Table string
	Rows  int
	Sum   string // hex SHA-256 over the sorted canonical rows
}

func (t TableSum) String() string {
	return fmt.Sprintf("%s: %d rows, sha256 %.16s", t.Table, t.Rows, t.Sum)
}

// Checksums returns one TableSum per table of the dump: campaign, events,
// passes, revisions, consensus, resume. Rows are written canonically
// without store-assigned IDs, with times in UTC at microsecond precision
// (what both backends keep), and sorted, so two stores holding the same
// campaign give the same sums whatever IDs and row order they use.
func (d CampaignDump) Checksums() ([]TableSum, error) {
	c := d.Campaign
	if len(c.Scanners) == 0 {
		c.Scanners = nil // no roster, however a backend keeps it
	}
	camp := []any{c.Name, c.Dataset, c.Mode, c.PerEvent, c.Blind, c.Adaptive, c.Seed, c.Schema, c.Instructions, c.Scanners, stamp(c.Created)}
	var events, passes, revs, cons, res [][]any
	for i, e := range d.Events {
		events = append(events, []any{i, e.EventID, e.Selection, e.Needed, e.ExtraRound, e.AdaptiveAdded})
	}
	for _, p := range d.Passes {
		q := p.Pass
		key := []any{q.EventID, q.Scanner, q.Round, stamp(q.Assigned)}
		passes = append(passes, append(key, q.State, stamp(q.Updated), micro(q.Seconds), q.Label, q.Revisions))
		for _, r := range p.Revisions {
			revs = append(revs, append(slices.Clone(key), r.Seq, r.State, r.Label, micro(r.Seconds), stamp(r.At), r.Schema))
		}
	}
	for _, x := range d.Consensus {
		cons = append(cons, []any{x.EventID, x.Method, x.Label, x.Posterior, x.By, stamp(x.At)})
	}
	for _, r := range d.Resume {
		res = append(res, []any{r.Scanner, r.State, stamp(r.Updated)})
	}
	tables := []struct {
		name string
		rows [][]any
	}{
		{"campaign", [][]any{camp}}, {"events", events}, {"passes", passes},
		{"revisions", revs}, {"consensus", cons}, {"resume", res},
	}
	sums := make([]TableSum, len(tables))
	for i, t := range tables {
		s, err := tableSum(t.name, t.rows)
		if err != nil {
			return nil, err
		}
		sums[i] = s
	}
	return sums, nil
}

// stamp is a time as both backends store it.
func stamp(t time.Time) string {
	if t.IsZero() {
		return ""
	}
	return t.UTC().Truncate(time.Microsecond).Format(time.RFC3339Nano)
}

// micro rounds seconds spent to the microsecond, so that float sums kept
// by different databases compare equal.
func micro(s float64) string { return fmt.Sprintf("%.6f", s) }

func tableSum(name string, rows [][]any) (TableSum, error) {
	lines := make([][]byte, len(rows))
	for i, r := range rows {
		b, err := json.Marshal(r)
		if err != nil { // e.g. a NaN score
			return TableSum{}, fmt.Errorf("checksum %s row %d: %w", name, i, err)
		}
		lines[i] = b
	}
	slices.SortFunc(lines, bytes.Compare)
	h := sha256.New()
	for _, l := range lines {
		h.Write(l)
		h.Write([]byte{'\n'})
	}
	return TableSum{Table: name, Rows: len(rows), Sum: hex.EncodeToString(h.Sum(nil))}, nil
}
