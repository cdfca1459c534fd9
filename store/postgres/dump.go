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
// scanners go on saving. Like Load, it has no deadline but the caller's.
func (s *Store) Dump(ctx context.Context, campaignID int64) (store.CampaignDump, error) {
	var d store.CampaignDump
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
// keeping every revision, counter and time stamp. Rows go in with the COPY
// protocol, so a campaign of millions of passes loads in one pass.
func (s *Store) Load(ctx context.Context, d store.CampaignDump) (int64, error) {
	c := d.Campaign
	var id int64
	// No deadline of ours: a campaign of millions of passes takes a while,
	// and the caller (tpcscan migrate) stops on Ctrl-C.
	err := s.retry(ctx, func(tx pgx.Tx) error {
		var err error
		if id, err = insertCampaign(ctx, tx, c, len(d.Events)); err != nil {
			return err
		}
		if err := insertEvents(ctx, tx, id, c.Seed, d.Events); err != nil {
			return err
		}
		if err := loadPasses(ctx, tx, id, d.Passes); err != nil {
			return err
		}
		if err := loadConsensus(ctx, tx, id, d.Consensus); err != nil {
			return err
		}
		rows := make([][]any, len(d.Resume))
		for i, r := range d.Resume {
			state := r.State
			if state == nil {
				state = []byte{}
			}
			rows[i] = []any{id, r.Scanner, state, r.Updated}
		}
		_, err = tx.CopyFrom(ctx, pgx.Identifier{"resume"}, []string{"campaign_id", "scanner", "state", "updated"}, pgx.CopyFromRows(rows))
		if err != nil {
			return fmt.Errorf("resume states: %w", err)
		}
		return nil
	})
	if err != nil {
		return 0, fmt.Errorf("load campaign %q: %w", c.Name, err)
	}
	return id, nil
}

// loadPasses copies passes and revisions in under IDs drawn from their
// identity sequences, then points each pass at its latest revision and
// counts each event's passes as taken.
func loadPasses(ctx context.Context, tx pgx.Tx, campaignID int64, passes []store.PassDump) error {
	nRevs := 0
	for _, pd := range passes {
		nRevs += len(pd.Revisions)
	}
	passIDs, err := nextIDs(ctx, tx, "passes", len(passes))
	if err != nil {
		return err
	}
	revIDs, err := nextIDs(ctx, tx, "revisions", nRevs)
	if err != nil {
		return err
	}
	passRows := make([][]any, len(passes))
	revRows := make([][]any, 0, nRevs)
	for i, pd := range passes {
		p := pd.Pass
		passRows[i] = []any{passIDs[i], campaignID, p.EventID, p.Scanner, p.Round, string(p.State), p.Assigned, p.Updated, p.Seconds, p.Revisions}
		for _, r := range pd.Revisions {
			label, err := json.Marshal(r.Label)
			if err != nil {
				return fmt.Errorf("revision %d of pass %d: encode label: %w", r.Seq, p.ID, err)
			}
			revRows = append(revRows, []any{revIDs[len(revRows)], passIDs[i], r.Seq, string(r.State), label, r.Seconds, r.At, r.Schema})
		}
	}
	_, err = tx.CopyFrom(ctx, pgx.Identifier{"passes"},
		[]string{"id", "campaign_id", "event_id", "scanner", "round", "state", "assigned", "updated", "seconds", "revisions"},
		pgx.CopyFromRows(passRows))
	if pgCode(err) == codeForeignKey {
		return fmt.Errorf("a pass names an event the campaign lacks: %w", store.ErrConflict)
	}
	if err != nil {
		return fmt.Errorf("passes: %w", err)
	}
	_, err = tx.CopyFrom(ctx, pgx.Identifier{"revisions"},
		[]string{"id", "pass_id", "seq", "state", "label", "seconds", "at", "schema_version"}, pgx.CopyFromRows(revRows))
	if err != nil {
		return fmt.Errorf("revisions: %w", err)
	}
	_, err = tx.Exec(ctx, `UPDATE passes p SET latest_revision =
		(SELECT r.id FROM revisions r WHERE r.pass_id = p.id ORDER BY r.seq DESC LIMIT 1)
		WHERE p.campaign_id = $1 AND p.revisions > 0`, campaignID)
	if err != nil {
		return fmt.Errorf("latest revisions: %w", err)
	}
	_, err = tx.Exec(ctx, `UPDATE events e SET taken = n.count FROM
		(SELECT event_id, count(*) FROM passes WHERE campaign_id = $1 GROUP BY event_id) n
		WHERE e.campaign_id = $1 AND e.event_id = n.event_id`, campaignID)
	if err != nil {
		return fmt.Errorf("count taken passes: %w", err)
	}
	return nil
}

func loadConsensus(ctx context.Context, tx pgx.Tx, campaignID int64, cs []scan.Consensus) error {
	rows := make([][]any, len(cs))
	for i, x := range cs {
		label, err := json.Marshal(x.Label)
		if err != nil {
			return fmt.Errorf("consensus of %s: encode label: %w", x.EventID, err)
		}
		rows[i] = []any{campaignID, x.EventID, x.Method, label, x.Posterior, x.By, x.At}
	}
	_, err := tx.CopyFrom(ctx, pgx.Identifier{"consensus"},
		[]string{"campaign_id", "event_id", "method", "label", "posterior", "decided_by", "at"}, pgx.CopyFromRows(rows))
	if pgCode(err) == codeForeignKey {
		return fmt.Errorf("a consensus label names an event the campaign lacks: %w", store.ErrConflict)
	}
	if err != nil {
		return fmt.Errorf("consensus: %w", err)
	}
	return nil
}

// nextIDs draws n values from a table's identity sequence, in order.
func nextIDs(ctx context.Context, tx pgx.Tx, table string, n int) ([]int64, error) {
	rows, err := tx.Query(ctx, `SELECT nextval(pg_get_serial_sequence($1, 'id')) FROM generate_series(1, $2) ORDER BY 1`, table, n)
	if err != nil {
		return nil, fmt.Errorf("allocate %s IDs: %w", table, err)
	}
	return pgx.CollectRows(rows, pgx.RowTo[int64])
}
