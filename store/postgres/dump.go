package postgres

import (
	"context"
	"encoding/json"
	"errors"
	"fmt"

	"github.com/jackc/pgx/v5"

	"github.com/tpcscan/tpcscan/scan"
	"github.com/tpcscan/tpcscan/store"
)

// Dump exports a whole campaign from one consistent snapshot, while
// scanners go on saving.
func (s *Store) Dump(ctx context.Context, campaignID int64) (store.CampaignDump, error) {
	var d store.CampaignDump
	ctx, cancel := context.WithTimeout(ctx, 10*opTimeout)
	defer cancel()
	opts := pgx.TxOptions{IsoLevel: pgx.RepeatableRead, AccessMode: pgx.ReadOnly}
	err := pgx.BeginTxFunc(ctx, s.pool, opts, func(tx pgx.Tx) error {
		var err error
		d.Campaign, _, err = scanCampaign(tx.QueryRow(ctx, "SELECT "+campaignColumns+" FROM campaigns WHERE id = $1", campaignID))
		if errors.Is(err, pgx.ErrNoRows) {
			return store.ErrNotFound
		}
		if err != nil {
			return err
		}
		if d.Events, err = readEvents(ctx, tx, campaignID); err != nil {
			return err
		}
		rows, err := tx.Query(ctx, passFrom+"WHERE p.campaign_id = $1 ORDER BY p.id", campaignID)
		if err != nil {
			return err
		}
		passes, err := collectPasses(rows)
		if err != nil {
			return err
		}
		rows, err = tx.Query(ctx, `SELECT r.id, r.pass_id, r.seq, r.state, r.label, r.seconds, r.at, r.schema_version
			FROM revisions r JOIN passes p ON p.id = r.pass_id WHERE p.campaign_id = $1 ORDER BY r.pass_id, r.seq`, campaignID)
		if err != nil {
			return err
		}
		revs, err := pgx.CollectRows(rows, scanRevision)
		if err != nil {
			return err
		}
		d.Passes = groupRevisions(passes, revs)
		rows, err = tx.Query(ctx, `SELECT campaign_id, event_id, method, label, posterior, decided_by, at
			FROM consensus WHERE campaign_id = $1 ORDER BY id`, campaignID)
		if err != nil {
			return err
		}
		if d.Consensus, err = pgx.CollectRows(rows, scanConsensus); err != nil {
			return err
		}
		rows, err = tx.Query(ctx, `SELECT scanner, state, updated FROM resume WHERE campaign_id = $1 ORDER BY scanner`, campaignID)
		if err != nil {
			return err
		}
		d.Resume, err = pgx.CollectRows(rows, pgx.RowToStructByPos[store.ResumeState])
		return err
	})
	if err != nil {
		return d, fmt.Errorf("dump campaign %d: %w", campaignID, err)
	}
	return d, nil
}

// groupRevisions attaches revisions to their passes.
func groupRevisions(passes []scan.Pass, revs []scan.Revision) []store.PassDump {
	out := make([]store.PassDump, len(passes))
	at := make(map[int64]int, len(passes))
	for i, p := range passes {
		out[i].Pass = p
		at[p.ID] = i
	}
	for _, r := range revs {
		if i, ok := at[r.PassID]; ok {
			out[i].Revisions = append(out[i].Revisions, r)
		}
	}
	return out
}

// Load imports a whole campaign in one transaction under new row IDs,
// keeping every revision, counter and time stamp.
func (s *Store) Load(ctx context.Context, d store.CampaignDump) (int64, error) {
	c := d.Campaign
	var id int64
	ctx, cancel := context.WithTimeout(ctx, 10*opTimeout)
	defer cancel()
	err := s.tx(ctx, func(tx pgx.Tx) error {
		var err error
		if id, err = insertCampaign(ctx, tx, c, len(d.Events)); err != nil {
			return err
		}
		if err := insertEvents(ctx, tx, id, c.Seed, d.Events); err != nil {
			return err
		}
		for _, pd := range d.Passes {
			if err := loadPass(ctx, tx, id, pd); err != nil {
				return err
			}
		}
		_, err = tx.Exec(ctx, `UPDATE events e SET taken = n.count FROM
			(SELECT event_id, count(*) FROM passes WHERE campaign_id = $1 GROUP BY event_id) n
			WHERE e.campaign_id = $1 AND e.event_id = n.event_id`, id)
		if err != nil {
			return fmt.Errorf("count taken passes: %w", err)
		}
		b := &pgx.Batch{}
		for _, x := range d.Consensus {
			label, err := json.Marshal(x.Label)
			if err != nil {
				return fmt.Errorf("consensus of %s: encode label: %w", x.EventID, err)
			}
			b.Queue(`INSERT INTO consensus (campaign_id, event_id, method, label, posterior, decided_by, at)
				VALUES ($1, $2, $3, $4, $5, $6, $7)`, id, x.EventID, x.Method, label, x.Posterior, x.By, x.At)
		}
		for _, r := range d.Resume {
			state := r.State
			if state == nil {
				state = []byte{}
			}
			b.Queue(`INSERT INTO resume (campaign_id, scanner, state, updated) VALUES ($1, $2, $3, $4)`,
				id, r.Scanner, state, r.Updated)
		}
		if err := tx.SendBatch(ctx, b).Close(); err != nil {
			return fmt.Errorf("consensus and resume states: %w", err)
		}
		return nil
	})
	if err != nil {
		return 0, fmt.Errorf("load campaign %q: %w", c.Name, err)
	}
	return id, nil
}

// loadPass inserts one pass and its revisions and points the pass at its
// latest revision.
func loadPass(ctx context.Context, tx pgx.Tx, campaignID int64, pd store.PassDump) error {
	p := pd.Pass
	var id int64
	err := tx.QueryRow(ctx, `INSERT INTO passes (campaign_id, event_id, scanner, round, state, assigned, updated, seconds, revisions)
		VALUES ($1, $2, $3, $4, $5, $6, $7, $8, $9) RETURNING id`,
		campaignID, p.EventID, p.Scanner, p.Round, string(p.State), p.Assigned, p.Updated, p.Seconds, p.Revisions).Scan(&id)
	if pgCode(err) == codeForeignKey {
		return fmt.Errorf("pass %d names event %s, which the campaign lacks: %w", p.ID, p.EventID, store.ErrConflict)
	}
	if err != nil {
		return fmt.Errorf("pass of %s by %q: %w", p.EventID, p.Scanner, err)
	}
	if len(pd.Revisions) == 0 {
		return nil
	}
	b := &pgx.Batch{}
	for _, r := range pd.Revisions {
		label, err := json.Marshal(r.Label)
		if err != nil {
			return fmt.Errorf("revision %d of pass %d: encode label: %w", r.Seq, p.ID, err)
		}
		b.Queue(`INSERT INTO revisions (pass_id, seq, state, label, seconds, at, schema_version)
			VALUES ($1, $2, $3, $4, $5, $6, $7)`, id, r.Seq, string(r.State), label, r.Seconds, r.At, r.Schema)
	}
	b.Queue(`UPDATE passes SET latest_revision = (SELECT id FROM revisions WHERE pass_id = $1 ORDER BY seq DESC LIMIT 1)
		WHERE id = $1`, id)
	if err := tx.SendBatch(ctx, b).Close(); err != nil {
		return fmt.Errorf("revisions of pass %d: %w", p.ID, err)
	}
	return nil
}
