package postgres

import (
	"context"
	"encoding/json"
	"errors"
	"fmt"
	"time"

	"github.com/jackc/pgx/v5"

	"github.com/tpcscan/tpcscan/scan"
	"github.com/tpcscan/tpcscan/scan/campaign"
	"github.com/tpcscan/tpcscan/store"
)

const campaignColumns = `id, name, dataset, mode, per_event, blind, adaptive, seed, schema_json, instructions, scanners, n_events, created`

// CreateCampaign stores a campaign and its events, shuffled on the ring by
// the campaign's seed, and returns its ID.
func (s *Store) CreateCampaign(ctx context.Context, c scan.Campaign, events []scan.CampaignEvent) (int64, error) {
	if err := campaign.Check(c, events); err != nil {
		return 0, fmt.Errorf("create campaign %q: %w", c.Name, err)
	}
	if c.Created.IsZero() {
		c.Created = time.Now()
	}
	evs := make([]store.EventDump, len(events))
	for i, e := range events {
		evs[i] = store.EventDump{CampaignEvent: e, Needed: c.PerEvent, ExtraRound: 1}
	}
	var id int64
	err := s.tx(ctx, func(tx pgx.Tx) error {
		var err error
		if id, err = insertCampaign(ctx, tx, c, len(events)); err != nil {
			return err
		}
		return insertEvents(ctx, tx, id, c.Seed, evs)
	})
	if err != nil {
		return 0, fmt.Errorf("create campaign %q: %w", c.Name, err)
	}
	return id, nil
}

func insertCampaign(ctx context.Context, tx pgx.Tx, c scan.Campaign, nEvents int) (int64, error) {
	schema, err := json.Marshal(c.Schema)
	if err != nil {
		return 0, fmt.Errorf("encode schema: %w", err)
	}
	roster := c.Scanners
	if roster == nil {
		roster = []string{}
	}
	rosterJSON, err := json.Marshal(roster)
	if err != nil {
		return 0, fmt.Errorf("encode roster: %w", err)
	}
	var id int64
	err = tx.QueryRow(ctx, `INSERT INTO campaigns (name, dataset, mode, per_event, blind, adaptive, seed,
		schema_json, schema_version, instructions, scanners, n_events, created)
		VALUES ($1, $2, $3, $4, $5, $6, $7, $8, $9, $10, $11, $12, $13) RETURNING id`,
		c.Name, c.Dataset, c.Mode, c.PerEvent, c.Blind, c.Adaptive, c.Seed,
		schema, c.Schema.Version, c.Instructions, rosterJSON, nEvents, c.Created).Scan(&id)
	if pgCode(err) == codeUnique {
		return 0, fmt.Errorf("a campaign named %q exists already: %w", c.Name, store.ErrConflict)
	}
	return id, err
}

// insertEvents copies the events in with the COPY protocol: a campaign may
// hold millions.
func insertEvents(ctx context.Context, tx pgx.Tx, campaignID, seed int64, events []store.EventDump) error {
	pos := campaign.Positions(seed, len(events))
	rows := make([][]any, len(events))
	for i, e := range events {
		var sel []byte
		if e.Selection != nil {
			var err error
			if sel, err = json.Marshal(e.Selection); err != nil {
				return fmt.Errorf("event %s: selection: %w", e.EventID, err)
			}
		}
		rows[i] = []any{campaignID, e.EventID, i, pos[i], e.Needed, e.ExtraRound, e.AdaptiveAdded, sel}
	}
	_, err := tx.CopyFrom(ctx, pgx.Identifier{"events"},
		[]string{"campaign_id", "event_id", "ord", "pos", "needed", "extra_round", "adaptive_added", "selection"},
		pgx.CopyFromRows(rows))
	if err != nil {
		return fmt.Errorf("insert events: %w", err)
	}
	return nil
}

// Campaign returns one campaign.
func (s *Store) Campaign(ctx context.Context, id int64) (scan.Campaign, error) {
	return s.campaignWhere(ctx, "id = $1", id, fmt.Sprintf("campaign %d", id))
}

// CampaignByName looks a campaign up by its name.
func (s *Store) CampaignByName(ctx context.Context, name string) (scan.Campaign, error) {
	return s.campaignWhere(ctx, "name = $1", name, fmt.Sprintf("campaign %q", name))
}

func (s *Store) campaignWhere(ctx context.Context, where string, arg any, what string) (scan.Campaign, error) {
	var c scan.Campaign
	err := s.tx(ctx, func(tx pgx.Tx) error {
		var err error
		c, _, err = scanCampaign(tx.QueryRow(ctx, "SELECT "+campaignColumns+" FROM campaigns WHERE "+where, arg))
		return err
	})
	if errors.Is(err, pgx.ErrNoRows) {
		return c, fmt.Errorf("%s: %w", what, store.ErrNotFound)
	}
	if err != nil {
		return c, fmt.Errorf("read %s: %w", what, err)
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
		cs, err = pgx.CollectRows(rows, func(r pgx.CollectableRow) (scan.Campaign, error) {
			c, _, err := scanCampaign(r)
			return c, err
		})
		return err
	})
	if err != nil {
		return nil, fmt.Errorf("list campaigns: %w", err)
	}
	return cs, nil
}

// scanCampaign reads one campaigns row and its event count.
func scanCampaign(r pgx.Row) (scan.Campaign, int, error) {
	var c scan.Campaign
	var n int
	var schema, roster []byte
	err := r.Scan(&c.ID, &c.Name, &c.Dataset, &c.Mode, &c.PerEvent, &c.Blind, &c.Adaptive, &c.Seed,
		&schema, &c.Instructions, &roster, &n, &c.Created)
	if err != nil {
		return c, 0, err
	}
	if err := json.Unmarshal(schema, &c.Schema); err != nil {
		return c, 0, fmt.Errorf("campaign %q: stored schema: %w", c.Name, err)
	}
	if err := json.Unmarshal(roster, &c.Scanners); err != nil {
		return c, 0, fmt.Errorf("campaign %q: stored roster: %w", c.Name, err)
	}
	if len(c.Scanners) == 0 {
		c.Scanners = nil
	}
	return c, n, nil
}

// Events returns the campaign's events in the order given at creation.
func (s *Store) Events(ctx context.Context, campaignID int64) ([]scan.CampaignEvent, error) {
	var evs []scan.CampaignEvent
	err := s.tx(ctx, func(tx pgx.Tx) error {
		ds, err := readEvents(ctx, tx, campaignID)
		for _, d := range ds {
			evs = append(evs, d.CampaignEvent)
		}
		return err
	})
	if err != nil {
		return nil, fmt.Errorf("read events of campaign %d: %w", campaignID, err)
	}
	return evs, nil
}

func readEvents(ctx context.Context, tx pgx.Tx, campaignID int64) ([]store.EventDump, error) {
	if err := requireCampaign(ctx, tx, campaignID); err != nil {
		return nil, err
	}
	rows, err := tx.Query(ctx, `SELECT event_id, selection, needed, extra_round, adaptive_added
		FROM events WHERE campaign_id = $1 ORDER BY ord`, campaignID)
	if err != nil {
		return nil, err
	}
	return pgx.CollectRows(rows, func(r pgx.CollectableRow) (store.EventDump, error) {
		var e store.EventDump
		var sel []byte
		if err := r.Scan(&e.EventID, &sel, &e.Needed, &e.ExtraRound, &e.AdaptiveAdded); err != nil {
			return e, err
		}
		if sel != nil {
			e.Selection = new(scan.Selection)
			if err := json.Unmarshal(sel, e.Selection); err != nil {
				return e, fmt.Errorf("event %s: stored selection: %w", e.EventID, err)
			}
		}
		return e, nil
	})
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
