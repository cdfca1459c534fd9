package postgres

import (
	"context"
	"encoding/binary"
	"encoding/json"
	"errors"
	"fmt"
	"hash/fnv"
	"time"

	"github.com/jackc/pgx/v5"

	"github.com/tpcscan/tpcscan/scan"
	"github.com/tpcscan/tpcscan/store"
)

const campaignColumns = `id, name, dataset, mode, per_event, blind, adaptive, seed, label_schema, instructions, created`

// CreateCampaign stores the campaign, its events and K open slots per event.
func (s *Store) CreateCampaign(ctx context.Context, c scan.Campaign, events []scan.CampaignEvent) (int64, error) {
	if c.Name == "" {
		return 0, errors.New("create campaign: empty name")
	}
	if c.PerEvent < 1 {
		return 0, fmt.Errorf("create campaign %q: %d scanners per event, need at least 1", c.Name, c.PerEvent)
	}
	if c.Created.IsZero() {
		c.Created = time.Now()
	}
	var id int64
	err := s.tx(ctx, func(tx pgx.Tx) error {
		var err error
		if id, err = insertCampaign(ctx, tx, c); err != nil {
			return err
		}
		if err := insertEvents(ctx, tx, id, c.Seed, events); err != nil {
			return err
		}
		_, err = tx.Exec(ctx, `INSERT INTO passes (campaign_id, event_id, round, pick, state)
			SELECT e.campaign_id, e.event_id, 1, e.pick, 'assigned'
			FROM events e CROSS JOIN generate_series(1, $2) WHERE e.campaign_id = $1`, id, c.PerEvent)
		if err != nil {
			return fmt.Errorf("open slots: %w", err)
		}
		return nil
	})
	if err != nil {
		return 0, fmt.Errorf("create campaign %q: %w", c.Name, err)
	}
	return id, nil
}

func insertCampaign(ctx context.Context, tx pgx.Tx, c scan.Campaign) (int64, error) {
	schema, err := json.Marshal(c.Schema)
	if err != nil {
		return 0, fmt.Errorf("encode schema: %w", err)
	}
	var id int64
	err = tx.QueryRow(ctx, `INSERT INTO campaigns (name, dataset, mode, per_event, blind, adaptive, seed,
		label_schema, schema_version, instructions, created)
		VALUES ($1, $2, $3, $4, $5, $6, $7, $8, $9, $10, $11) RETURNING id`,
		c.Name, c.Dataset, c.Mode, c.PerEvent, c.Blind, c.Adaptive, c.Seed,
		schema, c.Schema.Version, c.Instructions, c.Created).Scan(&id)
	if pgCode(err) == codeUnique {
		return 0, fmt.Errorf("a campaign of that name exists: %w", store.ErrConflict)
	}
	return id, err
}

// insertEvents copies the events in with the COPY protocol: a campaign may
// hold millions.
func insertEvents(ctx context.Context, tx pgx.Tx, campaignID, seed int64, events []scan.CampaignEvent) error {
	seen := make(map[string]bool, len(events))
	rows := make([][]any, len(events))
	for i, e := range events {
		if e.EventID == "" {
			return fmt.Errorf("event %d: empty event ID", i+1)
		}
		if seen[e.EventID] {
			return fmt.Errorf("event %q listed twice: %w", e.EventID, store.ErrConflict)
		}
		seen[e.EventID] = true
		row := []any{campaignID, e.EventID, i, pick(seed, 'e', e.EventID), nil, nil, nil, nil}
		if sel := e.Selection; sel != nil {
			row[4], row[5], row[6] = sel.Selected, sel.Class, sel.Score
			if sel.Box != nil {
				b, err := json.Marshal(sel.Box)
				if err != nil {
					return fmt.Errorf("event %q: encode box: %w", e.EventID, err)
				}
				row[7] = b
			}
		}
		rows[i] = row
	}
	_, err := tx.CopyFrom(ctx, pgx.Identifier{"events"},
		[]string{"campaign_id", "event_id", "ord", "pick", "selected", "sel_class", "score", "box"},
		pgx.CopyFromRows(rows))
	if err != nil {
		return fmt.Errorf("insert events: %w", err)
	}
	return nil
}

// pick places a name in a campaign's shuffled order: a 63-bit FNV-1a hash
// of the campaign seed, a kind byte and the name. Events sit at their pick;
// each scanner starts at its own pick and walks upward, wrapping around.
func pick(seed int64, kind byte, name string) int64 {
	h := fnv.New64a()
	var b [9]byte
	binary.LittleEndian.PutUint64(b[:8], uint64(seed))
	b[8] = kind
	h.Write(b[:])
	h.Write([]byte(name))
	return int64(h.Sum64() >> 1)
}

// Campaign returns one campaign.
func (s *Store) Campaign(ctx context.Context, id int64) (scan.Campaign, error) {
	return s.campaignWhere(ctx, "id = $1", id)
}

// CampaignByName looks a campaign up by its name.
func (s *Store) CampaignByName(ctx context.Context, name string) (scan.Campaign, error) {
	return s.campaignWhere(ctx, "name = $1", name)
}

func (s *Store) campaignWhere(ctx context.Context, where string, arg any) (scan.Campaign, error) {
	var c scan.Campaign
	err := s.tx(ctx, func(tx pgx.Tx) error {
		var err error
		c, err = scanCampaign(tx.QueryRow(ctx, "SELECT "+campaignColumns+" FROM campaigns WHERE "+where, arg))
		return err
	})
	if errors.Is(err, pgx.ErrNoRows) {
		return c, fmt.Errorf("campaign %v: %w", arg, store.ErrNotFound)
	}
	if err != nil {
		return c, fmt.Errorf("read campaign %v: %w", arg, err)
	}
	return c, nil
}

// Campaigns returns every campaign, oldest first.
func (s *Store) Campaigns(ctx context.Context) ([]scan.Campaign, error) {
	var cs []scan.Campaign
	err := s.tx(ctx, func(tx pgx.Tx) error {
		rows, err := tx.Query(ctx, "SELECT "+campaignColumns+" FROM campaigns ORDER BY id")
		if err != nil {
			return err
		}
		cs, err = pgx.CollectRows(rows, func(r pgx.CollectableRow) (scan.Campaign, error) { return scanCampaign(r) })
		return err
	})
	if err != nil {
		return nil, fmt.Errorf("list campaigns: %w", err)
	}
	return cs, nil
}

func scanCampaign(r pgx.Row) (scan.Campaign, error) {
	var c scan.Campaign
	var schema []byte
	err := r.Scan(&c.ID, &c.Name, &c.Dataset, &c.Mode, &c.PerEvent, &c.Blind, &c.Adaptive, &c.Seed,
		&schema, &c.Instructions, &c.Created)
	if err != nil {
		return c, err
	}
	if err := json.Unmarshal(schema, &c.Schema); err != nil {
		return c, fmt.Errorf("campaign %q: decode schema: %w", c.Name, err)
	}
	return c, nil
}

// Events returns the campaign's events in campaign order.
func (s *Store) Events(ctx context.Context, campaignID int64) ([]scan.CampaignEvent, error) {
	var evs []scan.CampaignEvent
	err := s.tx(ctx, func(tx pgx.Tx) error {
		if err := requireCampaign(ctx, tx, campaignID); err != nil {
			return err
		}
		rows, err := tx.Query(ctx, `SELECT event_id, selected, sel_class, score, box
			FROM events WHERE campaign_id = $1 ORDER BY ord`, campaignID)
		if err != nil {
			return err
		}
		evs, err = pgx.CollectRows(rows, scanEvent)
		return err
	})
	if err != nil {
		return nil, fmt.Errorf("read events of campaign %d: %w", campaignID, err)
	}
	return evs, nil
}

func scanEvent(r pgx.CollectableRow) (scan.CampaignEvent, error) {
	var e scan.CampaignEvent
	var selected *bool
	var class *string
	var score *float64
	var box []byte
	if err := r.Scan(&e.EventID, &selected, &class, &score, &box); err != nil {
		return e, err
	}
	if selected == nil {
		return e, nil
	}
	e.Selection = &scan.Selection{EventID: e.EventID, Selected: *selected}
	if class != nil {
		e.Selection.Class = *class
	}
	if score != nil {
		e.Selection.Score = *score
	}
	if box != nil {
		e.Selection.Box = new(scan.Mark)
		if err := json.Unmarshal(box, e.Selection.Box); err != nil {
			return e, fmt.Errorf("event %q: decode selection box: %w", e.EventID, err)
		}
	}
	return e, nil
}

// requireCampaign returns ErrNotFound unless the campaign exists.
func requireCampaign(ctx context.Context, tx pgx.Tx, id int64) error {
	var ok bool
	if err := tx.QueryRow(ctx, "SELECT EXISTS (SELECT 1 FROM campaigns WHERE id = $1)", id).Scan(&ok); err != nil {
		return err
	}
	if !ok {
		return fmt.Errorf("campaign %d: %w", id, store.ErrNotFound)
	}
	return nil
}
