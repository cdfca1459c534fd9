package postgres

import (
	"context"
	"encoding/json"
	"errors"
	"fmt"
	"slices"
	"time"

	"github.com/jackc/pgx/v5"

	"github.com/tpcscan/tpcscan/scan"
	"github.com/tpcscan/tpcscan/scan/campaign"
	"github.com/tpcscan/tpcscan/store"
)

// passFrom selects passes with their latest label.
const passFrom = `SELECT p.id, p.campaign_id, p.event_id, p.scanner, p.round, p.state,
	p.assigned, p.updated, p.seconds, r.label, p.revisions
	FROM passes p LEFT JOIN revisions r ON r.id = p.latest_revision `

func scanPass(r pgx.Row) (scan.Pass, error) {
	var p scan.Pass
	var state string
	var label []byte
	err := r.Scan(&p.ID, &p.CampaignID, &p.EventID, &p.Scanner, &p.Round, &state,
		&p.Assigned, &p.Updated, &p.Seconds, &label, &p.Revisions)
	if err != nil {
		return p, err
	}
	p.State = scan.PassState(state)
	if label != nil {
		if err := json.Unmarshal(label, &p.Label); err != nil {
			return p, fmt.Errorf("pass %d: stored label: %w", p.ID, err)
		}
	}
	return p, nil
}

func collectPasses(rows pgx.Rows) ([]scan.Pass, error) {
	return pgx.CollectRows(rows, func(r pgx.CollectableRow) (scan.Pass, error) { return scanPass(r) })
}

// info is what NextPass and SaveRevision need of a campaign.
type info struct {
	seed     int64
	perEvent int
	adaptive bool
	mode     string
	schema   scan.Schema
	nEvents  int
	roster   []string
}

// info returns the campaign facts the write paths need, cached.
func (s *Store) info(ctx context.Context, tx pgx.Tx, campaignID int64) (info, error) {
	s.mu.Lock()
	ci, ok := s.infos[campaignID]
	s.mu.Unlock()
	if ok {
		return ci, nil
	}
	ci, err := readInfo(ctx, tx, campaignID)
	if err != nil {
		return ci, err
	}
	s.mu.Lock()
	s.infos[campaignID] = ci
	s.mu.Unlock()
	return ci, nil
}

func readInfo(ctx context.Context, tx pgx.Tx, campaignID int64) (info, error) {
	var ci info
	var roster, schema []byte
	err := tx.QueryRow(ctx, `SELECT seed, per_event, adaptive, mode, schema_json, n_events, scanners
		FROM campaigns WHERE id = $1`, campaignID).Scan(&ci.seed, &ci.perEvent, &ci.adaptive, &ci.mode, &schema, &ci.nEvents, &roster)
	if errors.Is(err, pgx.ErrNoRows) {
		return ci, fmt.Errorf("campaign %d: %w", campaignID, store.ErrNotFound)
	}
	if err != nil {
		return ci, err
	}
	if err := json.Unmarshal(roster, &ci.roster); err != nil {
		return ci, fmt.Errorf("campaign %d: stored roster: %w", campaignID, err)
	}
	if err := json.Unmarshal(schema, &ci.schema); err != nil {
		return ci, fmt.Errorf("campaign %d: stored schema: %w", campaignID, err)
	}
	return ci, nil
}

// NextPass returns the scanner's open pass, or hands out the next event on
// the campaign's shuffled ring read from the scanner's offset: first
// events waiting for an extra pass, then any that still need a scanner.
//
// The work is the server-side function next_pass (migrations/001), one
// round trip. It is race-free across servers: the event row is taken with
// FOR UPDATE SKIP LOCKED, so concurrent sessions pick different events
// without waiting on each other, and its taken counter never passes
// needed; an advisory lock per (campaign, scanner) keeps one scanner's two
// sessions from opening two passes at once; the unique (campaign, event,
// scanner) key makes a second pass of one event by one scanner impossible.
func (s *Store) NextPass(ctx context.Context, campaignID int64, scanner string) (scan.Pass, error) {
	if err := campaign.CheckScanner(scanner); err != nil {
		return scan.Pass{}, err
	}
	var p scan.Pass
	err := s.tx(ctx, func(tx pgx.Tx) error {
		ci, err := s.info(ctx, tx, campaignID)
		if err != nil {
			return err
		}
		if len(ci.roster) > 0 && !slices.Contains(ci.roster, scanner) {
			return fmt.Errorf("%q may not join (roster: %v): %w", scanner, ci.roster, store.ErrUnknownScanner)
		}
		start := campaign.StartOffset(ci.seed, scanner, ci.nEvents)
		p, err = scanPass(tx.QueryRow(ctx, "SELECT * FROM next_pass($1, $2, $3, $4)", campaignID, scanner, start, ci.perEvent))
		if errors.Is(err, pgx.ErrNoRows) {
			return store.ErrNoWork
		}
		return err
	})
	if err != nil {
		return p, fmt.Errorf("next pass of %q in campaign %d: %w", scanner, campaignID, err)
	}
	return p, nil
}

// Pass returns one pass with its latest label.
func (s *Store) Pass(ctx context.Context, passID int64) (scan.Pass, error) {
	var p scan.Pass
	err := s.tx(ctx, func(tx pgx.Tx) error {
		var err error
		p, err = scanPass(tx.QueryRow(ctx, passFrom+"WHERE p.id = $1", passID))
		return err
	})
	if errors.Is(err, pgx.ErrNoRows) {
		return p, fmt.Errorf("pass %d: %w", passID, store.ErrNotFound)
	}
	if err != nil {
		return p, fmt.Errorf("read pass %d: %w", passID, err)
	}
	return p, nil
}

// Passes returns every pass of a campaign, by event (in campaign order)
// then pass ID.
func (s *Store) Passes(ctx context.Context, campaignID int64) ([]scan.Pass, error) {
	var ps []scan.Pass
	err := s.tx(ctx, func(tx pgx.Tx) error {
		if err := requireCampaign(ctx, tx, campaignID); err != nil {
			return err
		}
		rows, err := tx.Query(ctx, passFrom+`JOIN events e ON e.campaign_id = p.campaign_id AND e.event_id = p.event_id
			WHERE p.campaign_id = $1 ORDER BY e.ord, p.id`, campaignID)
		if err != nil {
			return err
		}
		ps, err = collectPasses(rows)
		return err
	})
	if err != nil {
		return nil, fmt.Errorf("read passes of campaign %d: %w", campaignID, err)
	}
	return ps, nil
}

// ScannerPasses returns one scanner's passes in the order they were assigned.
func (s *Store) ScannerPasses(ctx context.Context, campaignID int64, scanner string) ([]scan.Pass, error) {
	var ps []scan.Pass
	err := s.tx(ctx, func(tx pgx.Tx) error {
		if err := requireCampaign(ctx, tx, campaignID); err != nil {
			return err
		}
		rows, err := tx.Query(ctx, passFrom+`WHERE p.campaign_id = $1 AND p.scanner = $2 ORDER BY p.id`, campaignID, scanner)
		if err != nil {
			return err
		}
		ps, err = collectPasses(rows)
		return err
	})
	if err != nil {
		return nil, fmt.Errorf("read passes of %q in campaign %d: %w", scanner, campaignID, err)
	}
	return ps, nil
}

// SaveRevision appends a revision under a row lock on its pass, so two
// saves of one pass both land, in order. A first skip asks for a
// replacement pass; a submission may trigger the adaptive rule, decided
// under a lock on the event row so that two last submissions racing each
// other both count.
func (s *Store) SaveRevision(ctx context.Context, passID int64, scanner string, rev scan.Revision) (scan.Revision, error) {
	if err := campaign.CheckRevision(rev); err != nil {
		return rev, fmt.Errorf("save revision of pass %d: %w", passID, err)
	}
	label, err := json.Marshal(rev.Label)
	if err != nil {
		return rev, fmt.Errorf("save revision of pass %d: encode label: %w", passID, err)
	}
	var out scan.Revision
	err = s.tx(ctx, func(tx pgx.Tx) error {
		var owner, eventID, prev string
		var campaignID int64
		var seq, round int
		err := tx.QueryRow(ctx, `SELECT scanner, campaign_id, event_id, state, revisions, round FROM passes
			WHERE id = $1 FOR UPDATE`, passID).Scan(&owner, &campaignID, &eventID, &prev, &seq, &round)
		if errors.Is(err, pgx.ErrNoRows) {
			return store.ErrNotFound
		}
		if err != nil {
			return err
		}
		if owner != scanner {
			return fmt.Errorf("pass belongs to %q, not %q: %w", owner, scanner, store.ErrConflict)
		}
		ci, err := s.info(ctx, tx, campaignID)
		if err != nil {
			return err
		}
		if rev.Schema != 0 && rev.Schema != ci.schema.Version {
			return fmt.Errorf("label follows schema version %d but the campaign's schema %s is version %d (a campaign's schema is fixed): %w",
				rev.Schema, ci.schema.Name, ci.schema.Version, store.ErrConflict)
		}
		if err := checkRevision(ci, rev); err != nil {
			return fmt.Errorf("event %s: %w", eventID, err)
		}
		if adaptiveCheck(ci, round, scan.PassState(prev), rev.State) {
			// Lock the event before reading its other passes, so that two
			// last submissions racing each other see one another.
			if _, err := tx.Exec(ctx, "SELECT 1 FROM events WHERE campaign_id = $1 AND event_id = $2 FOR UPDATE",
				campaignID, eventID); err != nil {
				return err
			}
		}
		out = scan.Revision{PassID: passID, Seq: seq + 1, State: rev.State, Label: rev.Label, Seconds: rev.Seconds, Schema: ci.schema.Version}
		err = tx.QueryRow(ctx, `WITH r AS (
				INSERT INTO revisions (pass_id, seq, state, label, seconds, at, schema_version)
				VALUES ($1, $2, $3, $4, $5, clock_timestamp(), $6) RETURNING id, at)
			UPDATE passes SET state = $3, latest_revision = r.id, seconds = seconds + $5, revisions = $2, updated = r.at
			FROM r WHERE passes.id = $1 RETURNING r.id, r.at`,
			passID, out.Seq, string(rev.State), label, rev.Seconds, out.Schema).Scan(&out.ID, &out.At)
		if err != nil {
			return err
		}
		return afterSave(ctx, tx, campaignID, eventID, round, ci, scan.PassState(prev), rev.State)
	})
	if err != nil {
		return out, fmt.Errorf("save revision of pass %d: %w", passID, err)
	}
	return out, nil
}

// checkRevision checks the label against the campaign's frozen schema;
// a verify campaign's submissions need a verdict.
func checkRevision(ci info, rev scan.Revision) error {
	submit := rev.State == scan.PassSubmitted
	if err := ci.schema.CheckLabel(rev.Label, submit); err != nil {
		return err
	}
	if submit && ci.mode == scan.ModeVerify && rev.Label.Verdict == "" {
		return errors.New("a verify campaign needs a verdict: agree or disagree")
	}
	if submit && ci.mode == scan.ModeLabel && rev.Label.Verdict != "" {
		return errors.New("a label campaign takes no verdict")
	}
	return nil
}

// adaptiveCheck reports whether a save may trigger the adaptive rule: the
// first submission of a round-1 pass in an adaptive campaign.
func adaptiveCheck(ci info, round int, prev, now scan.PassState) bool {
	return ci.adaptive && round == 1 && now == scan.PassSubmitted && prev != scan.PassSubmitted
}

// afterSave applies the campaign rules after a pass moved from state prev
// to now: a first skip wants a replacement pass (withdrawn, if nobody took
// it yet, when the pass is taken up again); in an adaptive campaign the
// submission that completes K disagreeing round-1 passes wants one more.
func afterSave(ctx context.Context, tx pgx.Tx, campaignID int64, eventID string, round int, ci info, prev, now scan.PassState) error {
	switch {
	case now == scan.PassSkipped && prev != scan.PassSkipped:
		_, err := tx.Exec(ctx, "UPDATE events SET needed = needed + 1 WHERE campaign_id = $1 AND event_id = $2", campaignID, eventID)
		return err
	case prev == scan.PassSkipped && now != scan.PassSkipped:
		_, err := tx.Exec(ctx, "UPDATE events SET needed = needed - 1 WHERE campaign_id = $1 AND event_id = $2 AND taken < needed",
			campaignID, eventID)
		if err != nil {
			return err
		}
	}
	if !adaptiveCheck(ci, round, prev, now) {
		return nil
	}
	var extras int
	var sel []byte
	err := tx.QueryRow(ctx, "SELECT adaptive_added, selection FROM events WHERE campaign_id = $1 AND event_id = $2",
		campaignID, eventID).Scan(&extras, &sel)
	if err != nil {
		return err
	}
	var selection *scan.Selection
	if sel != nil {
		selection = new(scan.Selection)
		if err := json.Unmarshal(sel, selection); err != nil {
			return fmt.Errorf("event %s: stored selection: %w", eventID, err)
		}
	}
	rows, err := tx.Query(ctx, `SELECT r.label FROM passes p JOIN revisions r ON r.id = p.latest_revision
		WHERE p.campaign_id = $1 AND p.event_id = $2 AND p.round = 1 AND p.state = 'submitted'
		ORDER BY p.updated, p.id`, campaignID, eventID)
	if err != nil {
		return err
	}
	classes, err := pgx.CollectRows(rows, func(r pgx.CollectableRow) (string, error) {
		var b []byte
		var l scan.Label
		if err := r.Scan(&b); err != nil {
			return "", err
		}
		if err := json.Unmarshal(b, &l); err != nil {
			return "", err
		}
		return campaign.EffectiveClass(l, selection), nil
	})
	if err != nil {
		return err
	}
	if !campaign.NeedsExtraPass(ci.perEvent, classes, extras) {
		return nil
	}
	_, err = tx.Exec(ctx, `UPDATE events SET needed = needed + 1, extra_round = greatest(extra_round, 2),
		adaptive_added = adaptive_added + 1 WHERE campaign_id = $1 AND event_id = $2`, campaignID, eventID)
	return err
}

// Revisions returns a pass's revisions, oldest first.
func (s *Store) Revisions(ctx context.Context, passID int64) ([]scan.Revision, error) {
	var revs []scan.Revision
	err := s.tx(ctx, func(tx pgx.Tx) error {
		var ok bool
		if err := tx.QueryRow(ctx, "SELECT EXISTS (SELECT 1 FROM passes WHERE id = $1)", passID).Scan(&ok); err != nil {
			return err
		}
		if !ok {
			return store.ErrNotFound
		}
		rows, err := tx.Query(ctx, `SELECT id, pass_id, seq, state, label, seconds, at, schema_version
			FROM revisions WHERE pass_id = $1 ORDER BY seq`, passID)
		if err != nil {
			return err
		}
		revs, err = pgx.CollectRows(rows, scanRevision)
		return err
	})
	if err != nil {
		return nil, fmt.Errorf("read revisions of pass %d: %w", passID, err)
	}
	return revs, nil
}

func scanRevision(r pgx.CollectableRow) (scan.Revision, error) {
	var v scan.Revision
	var state string
	var label []byte
	if err := r.Scan(&v.ID, &v.PassID, &v.Seq, &state, &label, &v.Seconds, &v.At, &v.Schema); err != nil {
		return v, err
	}
	v.State = scan.PassState(state)
	if err := json.Unmarshal(label, &v.Label); err != nil {
		return v, fmt.Errorf("revision %d: stored label: %w", v.ID, err)
	}
	return v, nil
}

// AddPass asks for one more pass of an event, in the given round.
func (s *Store) AddPass(ctx context.Context, campaignID int64, eventID string, round int) error {
	if round < 1 {
		return fmt.Errorf("add pass of event %s: round %d, want 1 or more", eventID, round)
	}
	err := s.tx(ctx, func(tx pgx.Tx) error {
		tag, err := tx.Exec(ctx, `UPDATE events SET needed = needed + 1, extra_round = greatest(extra_round, $3)
			WHERE campaign_id = $1 AND event_id = $2`, campaignID, eventID, round)
		if err != nil {
			return err
		}
		if tag.RowsAffected() == 0 {
			return store.ErrNotFound
		}
		return nil
	})
	if err != nil {
		return fmt.Errorf("add pass of event %s in campaign %d: %w", eventID, campaignID, err)
	}
	return nil
}

// nullTime maps the zero time to SQL NULL.
func nullTime(t time.Time) *time.Time {
	if t.IsZero() {
		return nil
	}
	return &t
}
