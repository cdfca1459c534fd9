package postgres

import (
	"context"
	"encoding/json"
	"errors"
	"fmt"
	"time"

	"github.com/jackc/pgx/v5"

	"github.com/tpcscan/tpcscan/scan"
	"github.com/tpcscan/tpcscan/store"
)

const passColumns = `p.id, p.campaign_id, p.event_id, coalesce(p.scanner, ''), p.round, p.state,
	p.assigned, p.updated, p.seconds, p.label, p.revisions`

func scanPass(r pgx.Row) (scan.Pass, error) {
	var p scan.Pass
	var state string
	var assigned, updated *time.Time
	var label []byte
	err := r.Scan(&p.ID, &p.CampaignID, &p.EventID, &p.Scanner, &p.Round, &state,
		&assigned, &updated, &p.Seconds, &label, &p.Revisions)
	if err != nil {
		return p, err
	}
	p.State = scan.PassState(state)
	if assigned != nil {
		p.Assigned = *assigned
	}
	if updated != nil {
		p.Updated = *updated
	}
	if err := json.Unmarshal(label, &p.Label); err != nil {
		return p, fmt.Errorf("pass %d: decode label: %w", p.ID, err)
	}
	return p, nil
}

func collectPasses(rows pgx.Rows) ([]scan.Pass, error) {
	return pgx.CollectRows(rows, func(r pgx.CollectableRow) (scan.Pass, error) { return scanPass(r) })
}

// NextPass returns the scanner's open pass, or hands it the next open slot
// in its shuffled order. Each scanner walks the campaign's ring of event
// picks upward from where its last assignment was (at first, from its own
// pick), wrapping around once. FOR UPDATE SKIP LOCKED lets concurrent
// servers take different slots without waiting on each other; an advisory
// lock per (campaign, scanner) keeps one scanner's two sessions from
// taking two slots at once; the unique (campaign, event, scanner) key
// makes a second pass of one event for one scanner impossible.
func (s *Store) NextPass(ctx context.Context, campaignID int64, scanner string) (scan.Pass, error) {
	if scanner == "" {
		return scan.Pass{}, errors.New("next pass: empty scanner name")
	}
	var p scan.Pass
	err := s.tx(ctx, func(tx pgx.Tx) error {
		var seed int64
		err := tx.QueryRow(ctx, "SELECT seed FROM campaigns WHERE id = $1", campaignID).Scan(&seed)
		if errors.Is(err, pgx.ErrNoRows) {
			return fmt.Errorf("campaign %d: %w", campaignID, store.ErrNotFound)
		}
		if err != nil {
			return err
		}
		if _, err := tx.Exec(ctx, "SELECT pg_advisory_xact_lock($1, hashtext($2))", int32(campaignID), scanner); err != nil {
			return err
		}
		p, err = scanPass(tx.QueryRow(ctx, "SELECT "+passColumns+` FROM passes p
			WHERE p.campaign_id = $1 AND p.scanner = $2 AND p.state IN ('assigned', 'draft')
			ORDER BY p.assigned, p.id LIMIT 1`, campaignID, scanner))
		if err == nil || !errors.Is(err, pgx.ErrNoRows) {
			return err
		}
		start := pick(seed, 's', scanner)
		err = tx.QueryRow(ctx, `SELECT pick FROM passes
			WHERE campaign_id = $1 AND scanner = $2 ORDER BY assigned DESC, id DESC LIMIT 1`,
			campaignID, scanner).Scan(&start)
		if err != nil && !errors.Is(err, pgx.ErrNoRows) {
			return err
		}
		slot, err := openSlot(ctx, tx, campaignID, scanner, start)
		if err != nil {
			return err
		}
		p, err = scanPass(tx.QueryRow(ctx, `UPDATE passes p
			SET scanner = $2, assigned = clock_timestamp(), updated = clock_timestamp()
			WHERE p.id = $1 RETURNING `+passColumns, slot, scanner))
		return err
	})
	if err != nil {
		return p, fmt.Errorf("next pass of %q in campaign %d: %w", scanner, campaignID, err)
	}
	return p, nil
}

// openSlot locks the first open slot at or after start (then before it)
// whose event this scanner does not have yet.
func openSlot(ctx context.Context, tx pgx.Tx, campaignID int64, scanner string, start int64) (int64, error) {
	const q = `SELECT p.id FROM passes p
		WHERE p.campaign_id = $1 AND p.scanner IS NULL AND p.pick %s $3
		AND NOT EXISTS (SELECT 1 FROM passes o
			WHERE o.campaign_id = $1 AND o.event_id = p.event_id AND o.scanner = $2)
		ORDER BY p.pick, p.id LIMIT 1 FOR UPDATE OF p SKIP LOCKED`
	for _, op := range []string{">=", "<"} {
		var id int64
		err := tx.QueryRow(ctx, fmt.Sprintf(q, op), campaignID, scanner, start).Scan(&id)
		if err == nil {
			return id, nil
		}
		if !errors.Is(err, pgx.ErrNoRows) {
			return 0, err
		}
	}
	return 0, store.ErrNoWork
}

// Pass returns one pass with its latest label.
func (s *Store) Pass(ctx context.Context, passID int64) (scan.Pass, error) {
	var p scan.Pass
	err := s.tx(ctx, func(tx pgx.Tx) error {
		var err error
		p, err = scanPass(tx.QueryRow(ctx, "SELECT "+passColumns+" FROM passes p WHERE p.id = $1", passID))
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

// Passes returns every assigned pass of a campaign, by event (in campaign
// order) then pass ID. Open slots nobody holds yet are not passes.
func (s *Store) Passes(ctx context.Context, campaignID int64) ([]scan.Pass, error) {
	var ps []scan.Pass
	err := s.tx(ctx, func(tx pgx.Tx) error {
		if err := requireCampaign(ctx, tx, campaignID); err != nil {
			return err
		}
		rows, err := tx.Query(ctx, "SELECT "+passColumns+` FROM passes p
			JOIN events e ON e.campaign_id = p.campaign_id AND e.event_id = p.event_id
			WHERE p.campaign_id = $1 AND p.scanner IS NOT NULL ORDER BY e.ord, p.id`, campaignID)
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
		rows, err := tx.Query(ctx, "SELECT "+passColumns+` FROM passes p
			WHERE p.campaign_id = $1 AND p.scanner = $2 ORDER BY p.assigned, p.id`, campaignID, scanner)
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
// saves of one pass (two sessions of one scanner) both land, in order.
func (s *Store) SaveRevision(ctx context.Context, passID int64, scanner string, rev scan.Revision) (scan.Revision, error) {
	switch rev.State {
	case scan.PassDraft, scan.PassSubmitted, scan.PassSkipped:
	default:
		return rev, fmt.Errorf("save revision of pass %d: state %q, want draft, submitted or skipped", passID, rev.State)
	}
	label, err := json.Marshal(rev.Label)
	if err != nil {
		return rev, fmt.Errorf("save revision of pass %d: encode label: %w", passID, err)
	}
	var out scan.Revision
	err = s.tx(ctx, func(tx pgx.Tx) error {
		var owner *string
		var seq, schema int
		err := tx.QueryRow(ctx, `SELECT p.scanner, p.revisions, c.schema_version
			FROM passes p JOIN campaigns c ON c.id = p.campaign_id
			WHERE p.id = $1 FOR UPDATE OF p`, passID).Scan(&owner, &seq, &schema)
		if errors.Is(err, pgx.ErrNoRows) {
			return store.ErrNotFound
		}
		if err != nil {
			return err
		}
		if owner == nil || *owner != scanner {
			return fmt.Errorf("pass is not %q's: %w", scanner, store.ErrConflict)
		}
		if rev.Schema != 0 {
			schema = rev.Schema
		}
		out = scan.Revision{PassID: passID, Seq: seq + 1, State: rev.State, Label: rev.Label, Seconds: rev.Seconds, Schema: schema}
		err = tx.QueryRow(ctx, `INSERT INTO revisions (pass_id, seq, state, label, seconds, at, schema_version)
			VALUES ($1, $2, $3, $4, $5, clock_timestamp(), $6) RETURNING id, at`,
			passID, out.Seq, string(rev.State), label, rev.Seconds, schema).Scan(&out.ID, &out.At)
		if err != nil {
			return err
		}
		_, err = tx.Exec(ctx, `UPDATE passes SET state = $2, label = $3, seconds = seconds + $4,
			revisions = $5, updated = $6 WHERE id = $1`, passID, string(rev.State), label, rev.Seconds, out.Seq, out.At)
		return err
	})
	if err != nil {
		return out, fmt.Errorf("save revision of pass %d: %w", passID, err)
	}
	return out, nil
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
		return v, fmt.Errorf("revision %d: decode label: %w", v.ID, err)
	}
	return v, nil
}

// AddPass opens one more slot of an event for NextPass to hand out.
func (s *Store) AddPass(ctx context.Context, campaignID int64, eventID string, round int) error {
	if round < 1 {
		return fmt.Errorf("add pass of event %q: round %d, want 1 or more", eventID, round)
	}
	err := s.tx(ctx, func(tx pgx.Tx) error {
		tag, err := tx.Exec(ctx, `INSERT INTO passes (campaign_id, event_id, round, added, pick, state)
			SELECT campaign_id, event_id, $3, true, pick, 'assigned' FROM events
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
		return fmt.Errorf("add pass of event %q in campaign %d: %w", eventID, campaignID, err)
	}
	return nil
}
