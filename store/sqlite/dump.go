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

var (
	_ store.Dumper = (*Store)(nil)
	_ store.Loader = (*Store)(nil)
)

// Dump exports a whole campaign from one snapshot, while scanners go on
// saving.
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

func dumpEvents(ctx context.Context, tx *sql.Tx, id int64) ([]store.EventDump, error) {
	rows, err := tx.QueryContext(ctx, `SELECT event_id, selection, needed, extra_round, adaptive_added FROM events WHERE campaign_id = ? ORDER BY ord`, id)
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

func dumpPasses(ctx context.Context, tx *sql.Tx, id int64) ([]store.PassDump, error) {
	rows, err := tx.QueryContext(ctx, `SELECT `+passCols+passFrom+` WHERE p.campaign_id = ? ORDER BY p.id`, id)
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
		FROM revisions r JOIN passes p ON p.id = r.pass_id WHERE p.campaign_id = ? ORDER BY r.pass_id, r.seq`, id)
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

func dumpConsensus(ctx context.Context, tx *sql.Tx, id int64) ([]scan.Consensus, error) {
	rows, err := tx.QueryContext(ctx, `SELECT event_id, method, label, posterior, decided_by, at FROM consensus WHERE campaign_id = ? ORDER BY id`, id)
	if err != nil {
		return nil, err
	}
	defer rows.Close()
	var out []scan.Consensus
	for rows.Next() {
		x := scan.Consensus{CampaignID: id}
		var label, at string
		if err := rows.Scan(&x.EventID, &x.Method, &label, &x.Posterior, &x.By, &at); err != nil {
			return nil, err
		}
		if err := json.Unmarshal([]byte(label), &x.Label); err != nil {
			return nil, fmt.Errorf("consensus of %s: stored label: %w", x.EventID, err)
		}
		if x.At, err = parseStamp(at); err != nil {
			return nil, err
		}
		out = append(out, x)
	}
	return out, rows.Err()
}

func dumpResume(ctx context.Context, tx *sql.Tx, id int64) ([]store.ResumeState, error) {
	rows, err := tx.QueryContext(ctx, `SELECT scanner, state, updated FROM resume WHERE campaign_id = ? ORDER BY scanner`, id)
	if err != nil {
		return nil, err
	}
	defer rows.Close()
	var out []store.ResumeState
	for rows.Next() {
		var r store.ResumeState
		var up string
		if err := rows.Scan(&r.Scanner, &r.State, &up); err != nil {
			return nil, err
		}
		if r.Updated, err = parseStamp(up); err != nil {
			return nil, err
		}
		out = append(out, r)
	}
	return out, rows.Err()
}

// Load imports a whole campaign in one transaction under new row IDs,
// keeping every revision, counter and time stamp.
func (s *Store) Load(ctx context.Context, d store.CampaignDump) (int64, error) {
	c := d.Campaign
	evs := make([]scan.CampaignEvent, len(d.Events))
	for i, e := range d.Events {
		evs[i] = e.CampaignEvent
	}
	id, err := s.CreateCampaign(ctx, c, evs)
	if err != nil {
		return 0, err
	}
	err = s.tx(ctx, func(tx *sql.Tx) error {
		for _, pd := range d.Passes {
			if err := loadPass(ctx, tx, id, pd); err != nil {
				return err
			}
		}
		for _, e := range d.Events {
			if _, err := tx.ExecContext(ctx, `UPDATE events SET needed = ?, extra_round = ?, adaptive_added = ?,
				taken = (SELECT count(*) FROM passes p WHERE p.campaign_id = events.campaign_id AND p.event_id = events.event_id)
				WHERE campaign_id = ? AND event_id = ?`, e.Needed, max(e.ExtraRound, 1), e.AdaptiveAdded, id, e.EventID); err != nil {
				return fmt.Errorf("event %s: %w", e.EventID, err)
			}
		}
		for _, x := range d.Consensus {
			label, err := json.Marshal(x.Label)
			if err != nil {
				return err
			}
			if _, err := tx.ExecContext(ctx, `INSERT INTO consensus (campaign_id, event_id, method, label, posterior, decided_by, at) VALUES (?, ?, ?, ?, ?, ?, ?)`,
				id, x.EventID, x.Method, string(label), x.Posterior, x.By, stamp(x.At)); err != nil {
				return fmt.Errorf("consensus of %s: %w", x.EventID, err)
			}
		}
		for _, r := range d.Resume {
			if _, err := tx.ExecContext(ctx, `INSERT INTO resume (campaign_id, scanner, state, updated) VALUES (?, ?, ?, ?)`,
				id, r.Scanner, nonNilBytes(r.State), stamp(r.Updated)); err != nil {
				return fmt.Errorf("resume state of %s: %w", r.Scanner, err)
			}
		}
		return nil
	})
	if err != nil {
		// The campaign row went in its own transaction; take it out again.
		if derr := s.deleteCampaign(ctx, id); derr != nil {
			err = errors.Join(err, derr)
		}
		return 0, fmt.Errorf("load campaign %q: %w", c.Name, err)
	}
	return id, nil
}

func loadPass(ctx context.Context, tx *sql.Tx, campaignID int64, pd store.PassDump) error {
	p := pd.Pass
	res, err := tx.ExecContext(ctx, `INSERT INTO passes (campaign_id, event_id, scanner, round, state, assigned, updated, seconds, revisions)
		VALUES (?, ?, ?, ?, ?, ?, ?, ?, ?)`, campaignID, p.EventID, p.Scanner, p.Round, string(p.State), stamp(p.Assigned), stamp(p.Updated), p.Seconds, p.Revisions)
	if isForeignKey(err) {
		return fmt.Errorf("pass %d names event %s, which the campaign lacks: %w", p.ID, p.EventID, store.ErrConflict)
	}
	if err != nil {
		return fmt.Errorf("pass of %s by %q: %w", p.EventID, p.Scanner, err)
	}
	pid, err := res.LastInsertId()
	if err != nil {
		return err
	}
	var last int64
	for _, r := range pd.Revisions {
		label, err := json.Marshal(r.Label)
		if err != nil {
			return err
		}
		res, err := tx.ExecContext(ctx, `INSERT INTO revisions (pass_id, seq, state, label, seconds, at, schema_version) VALUES (?, ?, ?, ?, ?, ?, ?)`,
			pid, r.Seq, string(r.State), string(label), r.Seconds, stamp(r.At), r.Schema)
		if err != nil {
			return fmt.Errorf("revision %d of pass %d: %w", r.Seq, p.ID, err)
		}
		if last, err = res.LastInsertId(); err != nil {
			return err
		}
	}
	if last != 0 {
		_, err = tx.ExecContext(ctx, `UPDATE passes SET latest_revision = ? WHERE id = ?`, last, pid)
	}
	return err
}

// deleteCampaign removes a campaign that failed to load completely.
func (s *Store) deleteCampaign(ctx context.Context, id int64) error {
	s.mu.Lock()
	delete(s.schemas, id)
	s.mu.Unlock()
	return s.tx(ctx, func(tx *sql.Tx) error {
		for _, q := range []string{`DELETE FROM consensus WHERE campaign_id = ?`, `DELETE FROM resume WHERE campaign_id = ?`, `DELETE FROM events WHERE campaign_id = ?`, `DELETE FROM campaigns WHERE id = ?`} {
			if _, err := tx.ExecContext(ctx, q, id); err != nil {
				return err
			}
		}
		return nil
	})
}
