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

// Dump exports a whole campaign from one consistent snapshot.
func (s *Store) Dump(ctx context.Context, campaignID int64) (store.CampaignDump, error) {
	var d store.CampaignDump
	err := s.snapshot(ctx, func(tx pgx.Tx) error {
		var err error
		if d.Campaign, err = scanCampaign(tx.QueryRow(ctx, "SELECT "+campaignColumns+" FROM campaigns WHERE id = $1", campaignID)); err != nil {
			if errors.Is(err, pgx.ErrNoRows) {
				return store.ErrNotFound
			}
			return err
		}
		rows, err := tx.Query(ctx, `SELECT event_id, selected, sel_class, score, box
			FROM events WHERE campaign_id = $1 ORDER BY ord`, campaignID)
		if err != nil {
			return err
		}
		if d.Events, err = pgx.CollectRows(rows, scanEvent); err != nil {
			return err
		}
		// Open base slots are implied by K and not dumped; extra slots
		// (AddPass) are.
		rows, err = tx.Query(ctx, "SELECT "+passColumns+` FROM passes p
			WHERE p.campaign_id = $1 AND (p.scanner IS NOT NULL OR p.added) ORDER BY p.id`, campaignID)
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

// groupRevisions attaches revisions (ordered by pass) to their passes.
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

// snapshot runs fn in a read-only REPEATABLE READ transaction: every query
// sees the same moment, while scanners go on saving.
func (s *Store) snapshot(ctx context.Context, fn func(pgx.Tx) error) error {
	ctx, cancel := context.WithTimeout(ctx, 10*opTimeout)
	defer cancel()
	return pgx.BeginTxFunc(ctx, s.pool, pgx.TxOptions{IsoLevel: pgx.RepeatableRead, AccessMode: pgx.ReadOnly}, fn)
}

// Load imports a whole campaign in one transaction under new row IDs,
// keeping every revision and time stamp, and opens the base slots still
// due: K minus the event's round-1 passes already assigned.
func (s *Store) Load(ctx context.Context, d store.CampaignDump) (int64, error) {
	c := d.Campaign
	var id int64
	err := s.tx(ctx, func(tx pgx.Tx) error {
		var err error
		if id, err = insertCampaign(ctx, tx, c); err != nil {
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
		_, err = tx.Exec(ctx, `INSERT INTO passes (campaign_id, event_id, round, pick, state)
			SELECT e.campaign_id, e.event_id, 1, e.pick, 'assigned'
			FROM events e CROSS JOIN LATERAL generate_series(1, $2 - (SELECT count(*) FROM passes p
				WHERE p.campaign_id = e.campaign_id AND p.event_id = e.event_id
				AND p.round = 1 AND p.scanner IS NOT NULL)::integer)
			WHERE e.campaign_id = $1`, id, c.PerEvent)
		if err != nil {
			return fmt.Errorf("open slots: %w", err)
		}
		for _, x := range d.Consensus {
			label, err := json.Marshal(x.Label)
			if err != nil {
				return fmt.Errorf("consensus of %q: encode label: %w", x.EventID, err)
			}
			_, err = tx.Exec(ctx, `INSERT INTO consensus (campaign_id, event_id, method, label, posterior, decided_by, at)
				VALUES ($1, $2, $3, $4, $5, $6, $7)`, id, x.EventID, x.Method, label, x.Posterior, x.By, x.At)
			if err != nil {
				return fmt.Errorf("consensus of %q: %w", x.EventID, err)
			}
		}
		for _, r := range d.Resume {
			state := r.State
			if state == nil {
				state = []byte{}
			}
			_, err := tx.Exec(ctx, `INSERT INTO resume (campaign_id, scanner, state, updated) VALUES ($1, $2, $3, $4)`,
				id, r.Scanner, state, r.Updated)
			if err != nil {
				return fmt.Errorf("resume state of %q: %w", r.Scanner, err)
			}
		}
		return nil
	})
	if err != nil {
		return 0, fmt.Errorf("load campaign %q: %w", c.Name, err)
	}
	return id, nil
}

func loadPass(ctx context.Context, tx pgx.Tx, campaignID int64, pd store.PassDump) error {
	p := pd.Pass
	label, err := json.Marshal(p.Label)
	if err != nil {
		return fmt.Errorf("pass of %q by %q: encode label: %w", p.EventID, p.Scanner, err)
	}
	var scanner *string
	if p.Scanner != "" {
		scanner = &p.Scanner
	}
	var id int64
	err = tx.QueryRow(ctx, `INSERT INTO passes (campaign_id, event_id, scanner, round, added, pick, state,
			assigned, updated, seconds, label, revisions)
		SELECT $1, $2, $3, $4, $3 IS NULL, pick, $5, $6, $7, $8, $9, $10
		FROM events WHERE campaign_id = $1 AND event_id = $2 RETURNING id`,
		campaignID, p.EventID, scanner, p.Round, string(p.State), nullTime(p.Assigned), nullTime(p.Updated),
		p.Seconds, label, p.Revisions).Scan(&id)
	if errors.Is(err, pgx.ErrNoRows) {
		return fmt.Errorf("pass %d names event %q, which the campaign lacks: %w", p.ID, p.EventID, store.ErrConflict)
	}
	if err != nil {
		return fmt.Errorf("pass of %q by %q: %w", p.EventID, p.Scanner, err)
	}
	for _, r := range pd.Revisions {
		label, err := json.Marshal(r.Label)
		if err != nil {
			return fmt.Errorf("revision %d of pass %d: encode label: %w", r.Seq, p.ID, err)
		}
		_, err = tx.Exec(ctx, `INSERT INTO revisions (pass_id, seq, state, label, seconds, at, schema_version)
			VALUES ($1, $2, $3, $4, $5, $6, $7)`, id, r.Seq, string(r.State), label, r.Seconds, r.At, r.Schema)
		if err != nil {
			return fmt.Errorf("revision %d of pass %d: %w", r.Seq, p.ID, err)
		}
	}
	return nil
}
