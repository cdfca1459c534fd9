package sqlite

import (
	"context"
	"database/sql"
	"encoding/json"
	"errors"
	"fmt"
	"slices"
	"time"

	"github.com/tpcscan/tpcscan/scan"
	"github.com/tpcscan/tpcscan/scan/campaign"
	"github.com/tpcscan/tpcscan/store"
)

// NextPass returns the scanner's open pass, or hands out the next event on
// the scanner's part of the ring that still wants a pass and that the
// scanner has not had. Events waiting for an adaptive extra pass go first.
func (s *Store) NextPass(ctx context.Context, campaignID int64, scanner string) (scan.Pass, error) {
	if err := campaign.CheckScanner(scanner); err != nil {
		return scan.Pass{}, err
	}
	var p scan.Pass
	err := s.tx(ctx, func(tx *sql.Tx) error {
		ci, err := s.info(ctx, tx, campaignID)
		if err != nil {
			return err
		}
		if len(ci.roster) > 0 && !slices.Contains(ci.roster, scanner) {
			return fmt.Errorf("%q may not join (roster: %v): %w", scanner, ci.roster, store.ErrUnknownScanner)
		}
		var id int64
		err = tx.QueryRowContext(ctx, `SELECT id FROM passes WHERE campaign_id = ? AND scanner = ? AND state IN ('assigned', 'draft') ORDER BY id LIMIT 1`, campaignID, scanner).Scan(&id)
		if err == nil {
			p, err = getPass(ctx, tx, id)
			return err
		}
		if !errors.Is(err, sql.ErrNoRows) {
			return err
		}
		ev, err := nextEvent(ctx, tx, campaignID, scanner, campaign.StartOffset(ci.seed, scanner, ci.nEvents))
		if err != nil {
			return err
		}
		id, err = assign(ctx, tx, campaignID, ev, scanner, ci.perEvent)
		if err != nil {
			return err
		}
		p, err = getPass(ctx, tx, id)
		return err
	})
	if err != nil {
		return p, fmt.Errorf("next event for %s in campaign %d: %w", scanner, campaignID, err)
	}
	return p, nil
}

// nextEvent finds the first event on the ring from offset that wants a
// pass the scanner has not given: extra-round events first, then the ring
// from the offset to its end, then from its start. Each is one seek on a
// partial index; the NOT EXISTS skips only the scanner's own events.
func nextEvent(ctx context.Context, tx *sql.Tx, campaignID int64, scanner string, offset int) (string, error) {
	const mine = ` AND NOT EXISTS (SELECT 1 FROM passes p WHERE p.campaign_id = e.campaign_id AND p.event_id = e.event_id AND p.scanner = ?) ORDER BY e.pos LIMIT 1`
	queries := []struct {
		q    string
		args []any
	}{
		{`SELECT event_id FROM events e WHERE e.campaign_id = ? AND e.taken < e.needed AND e.extra_round > 1` + mine, []any{campaignID, scanner}},
		{`SELECT event_id FROM events e WHERE e.campaign_id = ? AND e.taken < e.needed AND e.pos >= ?` + mine, []any{campaignID, offset, scanner}},
		{`SELECT event_id FROM events e WHERE e.campaign_id = ? AND e.taken < e.needed AND e.pos < ?` + mine, []any{campaignID, offset, scanner}},
	}
	for _, q := range queries {
		var ev string
		err := tx.QueryRowContext(ctx, q.q, q.args...).Scan(&ev)
		if err == nil {
			return ev, nil
		}
		if !errors.Is(err, sql.ErrNoRows) {
			return "", err
		}
	}
	return "", store.ErrNoWork
}

// assign creates the pass of scanner on event and counts it as taken.
func assign(ctx context.Context, tx *sql.Tx, campaignID int64, event, scanner string, perEvent int) (int64, error) {
	var taken, extraRound int
	if err := tx.QueryRowContext(ctx, `SELECT taken, extra_round FROM events WHERE campaign_id = ? AND event_id = ?`, campaignID, event).Scan(&taken, &extraRound); err != nil {
		return 0, err
	}
	round := 1
	if taken >= perEvent {
		round = extraRound
	}
	now := stamp(time.Now())
	res, err := tx.ExecContext(ctx, `INSERT INTO passes (campaign_id, event_id, scanner, round, state, assigned, updated) VALUES (?, ?, ?, ?, 'assigned', ?, ?)`,
		campaignID, event, scanner, round, now, now)
	if isUnique(err) {
		return 0, fmt.Errorf("event %s already has a pass by %s: %w", event, scanner, store.ErrConflict)
	}
	if err != nil {
		return 0, err
	}
	if _, err := tx.ExecContext(ctx, `UPDATE events SET taken = taken + 1 WHERE campaign_id = ? AND event_id = ?`, campaignID, event); err != nil {
		return 0, err
	}
	return res.LastInsertId()
}

const passCols = `p.id, p.campaign_id, p.event_id, p.scanner, p.round, p.state, p.assigned, p.updated, p.seconds, p.revisions, r.label`
const passFrom = ` FROM passes p LEFT JOIN revisions r ON r.id = p.latest_revision`

func scanPass(row interface{ Scan(...any) error }) (scan.Pass, error) {
	var (
		p             scan.Pass
		state, as, up string
		label         sql.NullString
	)
	if err := row.Scan(&p.ID, &p.CampaignID, &p.EventID, &p.Scanner, &p.Round, &state, &as, &up, &p.Seconds, &p.Revisions, &label); err != nil {
		return p, err
	}
	p.State = scan.PassState(state)
	var err error
	if p.Assigned, err = parseStamp(as); err != nil {
		return p, err
	}
	if p.Updated, err = parseStamp(up); err != nil {
		return p, err
	}
	if label.Valid {
		if err := json.Unmarshal([]byte(label.String), &p.Label); err != nil {
			return p, fmt.Errorf("pass %d: stored label: %w", p.ID, err)
		}
	}
	return p, nil
}

func getPass(ctx context.Context, tx *sql.Tx, id int64) (scan.Pass, error) {
	p, err := scanPass(tx.QueryRowContext(ctx, `SELECT `+passCols+passFrom+` WHERE p.id = ?`, id))
	if errors.Is(err, sql.ErrNoRows) {
		return p, fmt.Errorf("pass %d: %w", id, store.ErrNotFound)
	}
	return p, err
}

// passHead reads what SaveRevision needs of a pass, without its label.
func passHead(ctx context.Context, tx *sql.Tx, id int64) (scan.Pass, error) {
	p := scan.Pass{ID: id}
	var state string
	err := tx.QueryRowContext(ctx, `SELECT campaign_id, event_id, scanner, round, state, revisions FROM passes WHERE id = ?`, id).
		Scan(&p.CampaignID, &p.EventID, &p.Scanner, &p.Round, &state, &p.Revisions)
	if errors.Is(err, sql.ErrNoRows) {
		return p, fmt.Errorf("pass %d: %w", id, store.ErrNotFound)
	}
	p.State = scan.PassState(state)
	return p, err
}

// Pass returns one pass with its latest label.
func (s *Store) Pass(ctx context.Context, passID int64) (scan.Pass, error) {
	var p scan.Pass
	err := s.view(ctx, func(tx *sql.Tx) error {
		var err error
		p, err = getPass(ctx, tx, passID)
		return err
	})
	if err != nil {
		return p, fmt.Errorf("read pass %d: %w", passID, err)
	}
	return p, nil
}

// Passes returns every pass of a campaign with its latest label, by event
// (in campaign order) then pass ID.
func (s *Store) Passes(ctx context.Context, campaignID int64) ([]scan.Pass, error) {
	ps, err := s.passes(ctx, campaignID, `SELECT `+passCols+passFrom+` JOIN events e ON e.campaign_id = p.campaign_id AND e.event_id = p.event_id
		WHERE p.campaign_id = ? ORDER BY e.ord, p.id`, campaignID)
	if err != nil {
		return nil, fmt.Errorf("read passes of campaign %d: %w", campaignID, err)
	}
	return ps, nil
}

// ScannerPasses returns one scanner's passes in the order they were assigned.
func (s *Store) ScannerPasses(ctx context.Context, campaignID int64, scanner string) ([]scan.Pass, error) {
	ps, err := s.passes(ctx, campaignID, `SELECT `+passCols+passFrom+` WHERE p.campaign_id = ? AND p.scanner = ? ORDER BY p.id`, campaignID, scanner)
	if err != nil {
		return nil, fmt.Errorf("read passes of %s in campaign %d: %w", scanner, campaignID, err)
	}
	return ps, nil
}

func (s *Store) passes(ctx context.Context, campaignID int64, q string, args ...any) ([]scan.Pass, error) {
	var ps []scan.Pass
	err := s.view(ctx, func(tx *sql.Tx) error {
		if _, err := s.info(ctx, tx, campaignID); err != nil {
			return err
		}
		rows, err := tx.QueryContext(ctx, q, args...)
		if err != nil {
			return err
		}
		defer rows.Close()
		for rows.Next() {
			p, err := scanPass(rows)
			if err != nil {
				return err
			}
			ps = append(ps, p)
		}
		return rows.Err()
	})
	return ps, err
}

// SaveRevision appends a revision to the scanner's pass, moves the pass to
// the revision's state, and applies the campaign rules: a skip asks for a
// replacement pass, and in an adaptive campaign the submission that
// completes K disagreeing passes asks for one more.
func (s *Store) SaveRevision(ctx context.Context, passID int64, scanner string, rev scan.Revision) (scan.Revision, error) {
	if err := campaign.CheckRevision(rev); err != nil {
		return rev, fmt.Errorf("save pass %d: %w", passID, err)
	}
	label, err := json.Marshal(rev.Label)
	if err != nil {
		return rev, fmt.Errorf("save pass %d: %w", passID, err)
	}
	err = s.tx(ctx, func(tx *sql.Tx) error {
		p, err := passHead(ctx, tx, passID)
		if err != nil {
			return err
		}
		if p.Scanner != scanner {
			return fmt.Errorf("pass %d belongs to another scanner: %w", passID, store.ErrConflict)
		}
		ci, err := s.info(ctx, tx, p.CampaignID)
		if err != nil {
			return err
		}
		if rev.Schema != 0 && rev.Schema != ci.schema.Version {
			return fmt.Errorf("label follows schema version %d but the campaign's schema %s is version %d (a campaign's schema is fixed): %w", rev.Schema, ci.schema.Name, ci.schema.Version, store.ErrConflict)
		}
		if err := checkRevision(ci, rev); err != nil {
			return fmt.Errorf("event %s: %w", p.EventID, err)
		}
		rev.PassID, rev.Seq, rev.Schema = passID, p.Revisions+1, ci.schema.Version
		rev.At = time.Now().UTC().Truncate(time.Microsecond)
		res, err := tx.ExecContext(ctx, `INSERT INTO revisions (pass_id, seq, state, label, seconds, at, schema_version) VALUES (?, ?, ?, ?, ?, ?, ?)`,
			passID, rev.Seq, string(rev.State), string(label), rev.Seconds, stamp(rev.At), rev.Schema)
		if err != nil {
			return err
		}
		if rev.ID, err = res.LastInsertId(); err != nil {
			return err
		}
		if _, err := tx.ExecContext(ctx, `UPDATE passes SET state = ?, updated = ?, seconds = seconds + ?, revisions = ?, latest_revision = ? WHERE id = ?`,
			string(rev.State), stamp(rev.At), rev.Seconds, rev.Seq, rev.ID, passID); err != nil {
			return err
		}
		return applyRules(ctx, tx, ci, p, rev.State)
	})
	if err != nil {
		return rev, fmt.Errorf("save pass %d: %w", passID, err)
	}
	return rev, nil
}

// checkRevision checks the label against the campaign's frozen schema;
// a verify campaign's submissions need a verdict.
func checkRevision(ci campaignInfo, rev scan.Revision) error {
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

// applyRules updates how many passes the event wants after a pass moved
// from state was to now.
func applyRules(ctx context.Context, tx *sql.Tx, ci campaignInfo, was scan.Pass, now scan.PassState) error {
	ev := []any{was.CampaignID, was.EventID}
	switch {
	case now == scan.PassSkipped && was.State != scan.PassSkipped:
		// Someone else should look at it instead.
		_, err := tx.ExecContext(ctx, `UPDATE events SET needed = needed + 1 WHERE campaign_id = ? AND event_id = ?`, ev...)
		return err
	case was.State == scan.PassSkipped && now != scan.PassSkipped:
		// Withdraw the replacement if nobody has taken it yet.
		_, err := tx.ExecContext(ctx, `UPDATE events SET needed = needed - 1 WHERE campaign_id = ? AND event_id = ? AND taken < needed`, ev...)
		if err != nil {
			return err
		}
	}
	if now != scan.PassSubmitted || was.State == scan.PassSubmitted || !ci.adaptive || was.Round != 1 {
		return nil
	}
	return adapt(ctx, tx, ci, was.CampaignID, was.EventID)
}

// adapt adds one extra pass when the first K submitted round-1 passes of
// the event disagree on class (the rule is campaign.NeedsExtraPass).
func adapt(ctx context.Context, tx *sql.Tx, ci campaignInfo, campaignID int64, event string) error {
	var added int
	var sel sql.NullString
	if err := tx.QueryRowContext(ctx, `SELECT adaptive_added, selection FROM events WHERE campaign_id = ? AND event_id = ?`, campaignID, event).Scan(&added, &sel); err != nil {
		return err
	}
	selection, err := decodeSelection(sel)
	if err != nil {
		return err
	}
	rows, err := tx.QueryContext(ctx, `SELECT r.label FROM passes p JOIN revisions r ON r.id = p.latest_revision
		WHERE p.campaign_id = ? AND p.event_id = ? AND p.round = 1 AND p.state = 'submitted' ORDER BY p.updated, p.id`, campaignID, event)
	if err != nil {
		return err
	}
	defer rows.Close()
	var classes []string
	for rows.Next() {
		var raw string
		if err := rows.Scan(&raw); err != nil {
			return err
		}
		var l scan.Label
		if err := json.Unmarshal([]byte(raw), &l); err != nil {
			return err
		}
		classes = append(classes, campaign.EffectiveClass(l, selection))
	}
	if err := rows.Err(); err != nil {
		return err
	}
	if !campaign.NeedsExtraPass(ci.perEvent, classes, added) {
		return nil
	}
	_, err = tx.ExecContext(ctx, `UPDATE events SET needed = needed + 1, extra_round = max(extra_round, 2), adaptive_added = adaptive_added + 1 WHERE campaign_id = ? AND event_id = ?`, campaignID, event)
	return err
}

// Revisions returns a pass's revisions, oldest first.
func (s *Store) Revisions(ctx context.Context, passID int64) ([]scan.Revision, error) {
	var rs []scan.Revision
	err := s.view(ctx, func(tx *sql.Tx) error {
		if _, err := getPass(ctx, tx, passID); err != nil {
			return err
		}
		rows, err := tx.QueryContext(ctx, `SELECT id, pass_id, seq, state, label, seconds, at, schema_version FROM revisions WHERE pass_id = ? ORDER BY seq`, passID)
		if err != nil {
			return err
		}
		defer rows.Close()
		for rows.Next() {
			var r scan.Revision
			var state, label, at string
			if err := rows.Scan(&r.ID, &r.PassID, &r.Seq, &state, &label, &r.Seconds, &at, &r.Schema); err != nil {
				return err
			}
			r.State = scan.PassState(state)
			if err := json.Unmarshal([]byte(label), &r.Label); err != nil {
				return fmt.Errorf("revision %d: stored label: %w", r.ID, err)
			}
			if r.At, err = parseStamp(at); err != nil {
				return err
			}
			rs = append(rs, r)
		}
		return rows.Err()
	})
	if err != nil {
		return nil, fmt.Errorf("read revisions of pass %d: %w", passID, err)
	}
	return rs, nil
}

// AddPass asks for one more pass of an event, in the given round (2 or
// more for an extra pass); NextPass hands it out.
func (s *Store) AddPass(ctx context.Context, campaignID int64, eventID string, round int) error {
	if round < 1 {
		return fmt.Errorf("add pass of %s: round must be 1 or more, got %d", eventID, round)
	}
	err := s.tx(ctx, func(tx *sql.Tx) error {
		res, err := tx.ExecContext(ctx, `UPDATE events SET needed = needed + 1, extra_round = max(extra_round, ?) WHERE campaign_id = ? AND event_id = ?`, round, campaignID, eventID)
		if err != nil {
			return err
		}
		if n, err := res.RowsAffected(); err != nil {
			return err
		} else if n == 0 {
			return fmt.Errorf("event %s is not in campaign %d: %w", eventID, campaignID, store.ErrNotFound)
		}
		return nil
	})
	if err != nil {
		return fmt.Errorf("add pass of %s: %w", eventID, err)
	}
	return nil
}
