package sqlite

import (
	"context"
	"database/sql"
	"encoding/json"
	"errors"
	"fmt"

	"github.com/tpcscan/tpcscan/scan"
	"github.com/tpcscan/tpcscan/store"
)

var _ store.Dumper = (*Store)(nil)

// Dump exports a whole campaign from one read snapshot (tpcscan migrate
// copies it to another store).
func (s *Store) Dump(ctx context.Context, campaignID int64) (store.CampaignDump, error) {
	var d store.CampaignDump
	err := s.view(ctx, func(tx *sql.Tx) error {
		var err error
		d.Campaign, _, err = scanCampaign(tx.QueryRowContext(ctx, `SELECT `+campaignCols+` FROM campaigns WHERE id = ?`, campaignID))
		if errors.Is(err, sql.ErrNoRows) {
			return fmt.Errorf("campaign %d: %w", campaignID, store.ErrNotFound)
		}
		if err != nil {
			return err
		}
		if d.Events, err = dumpEvents(ctx, tx, campaignID); err != nil {
			return err
		}
		if d.Passes, err = dumpPasses(ctx, tx, campaignID); err != nil {
			return err
		}
		if d.Consensus, err = dumpConsensus(ctx, tx, campaignID); err != nil {
			return err
		}
		d.Resume, err = dumpResume(ctx, tx, campaignID)
		return err
	})
	if err != nil {
		return d, fmt.Errorf("dump campaign %d: %w", campaignID, err)
	}
	return d, nil
}

func dumpEvents(ctx context.Context, tx *sql.Tx, campaignID int64) ([]store.EventDump, error) {
	rows, err := tx.QueryContext(ctx, `SELECT event_id, selection, needed, extra_round, adaptive_added
		FROM events WHERE campaign_id = ? ORDER BY ord`, campaignID)
	if err != nil {
		return nil, err
	}
	defer rows.Close()
	var evs []store.EventDump
	for rows.Next() {
		var e store.EventDump
		var sel sql.NullString
		if err := rows.Scan(&e.EventID, &sel, &e.Needed, &e.ExtraRound, &e.AdaptiveAdded); err != nil {
			return nil, err
		}
		if e.Selection, err = decodeSelection(sel); err != nil {
			return nil, fmt.Errorf("event %s: %w", e.EventID, err)
		}
		evs = append(evs, e)
	}
	return evs, rows.Err()
}

func dumpPasses(ctx context.Context, tx *sql.Tx, campaignID int64) ([]store.PassDump, error) {
	rows, err := tx.QueryContext(ctx, `SELECT `+passCols+passFrom+` WHERE p.campaign_id = ? ORDER BY p.id`, campaignID)
	if err != nil {
		return nil, err
	}
	var out []store.PassDump
	at := map[int64]int{}
	for rows.Next() {
		p, err := scanPass(rows)
		if err != nil {
			rows.Close()
			return nil, err
		}
		at[p.ID] = len(out)
		out = append(out, store.PassDump{Pass: p})
	}
	rows.Close()
	if err := rows.Err(); err != nil {
		return nil, err
	}
	rows, err = tx.QueryContext(ctx, `SELECT r.id, r.pass_id, r.seq, r.state, r.label, r.seconds, r.at, r.schema_version
		FROM revisions r JOIN passes p ON p.id = r.pass_id WHERE p.campaign_id = ? ORDER BY r.pass_id, r.seq`, campaignID)
	if err != nil {
		return nil, err
	}
	defer rows.Close()
	for rows.Next() {
		var r scan.Revision
		var state, label, stamp string
		if err := rows.Scan(&r.ID, &r.PassID, &r.Seq, &state, &label, &r.Seconds, &stamp, &r.Schema); err != nil {
			return nil, err
		}
		r.State = scan.PassState(state)
		if err := json.Unmarshal([]byte(label), &r.Label); err != nil {
			return nil, fmt.Errorf("revision %d: stored label: %w", r.ID, err)
		}
		if r.At, err = parseStamp(stamp); err != nil {
			return nil, err
		}
		if i, ok := at[r.PassID]; ok {
			out[i].Revisions = append(out[i].Revisions, r)
		}
	}
	return out, rows.Err()
}

func dumpConsensus(ctx context.Context, tx *sql.Tx, campaignID int64) ([]scan.Consensus, error) {
	rows, err := tx.QueryContext(ctx, `SELECT event_id, method, label, posterior, decided_by, at
		FROM consensus WHERE campaign_id = ? ORDER BY id`, campaignID)
	if err != nil {
		return nil, err
	}
	defer rows.Close()
	var cs []scan.Consensus
	for rows.Next() {
		x := scan.Consensus{CampaignID: campaignID}
		var label, stamp string
		if err := rows.Scan(&x.EventID, &x.Method, &label, &x.Posterior, &x.By, &stamp); err != nil {
			return nil, err
		}
		if err := json.Unmarshal([]byte(label), &x.Label); err != nil {
			return nil, fmt.Errorf("consensus of %s: stored label: %w", x.EventID, err)
		}
		if x.At, err = parseStamp(stamp); err != nil {
			return nil, err
		}
		cs = append(cs, x)
	}
	return cs, rows.Err()
}

func dumpResume(ctx context.Context, tx *sql.Tx, campaignID int64) ([]store.ResumeState, error) {
	rows, err := tx.QueryContext(ctx, `SELECT scanner, state, updated FROM resume WHERE campaign_id = ? ORDER BY scanner`, campaignID)
	if err != nil {
		return nil, err
	}
	defer rows.Close()
	var rs []store.ResumeState
	for rows.Next() {
		var r store.ResumeState
		var stamp string
		if err := rows.Scan(&r.Scanner, &r.State, &stamp); err != nil {
			return nil, err
		}
		if r.Updated, err = parseStamp(stamp); err != nil {
			return nil, err
		}
		rs = append(rs, r)
	}
	return rs, rows.Err()
}
