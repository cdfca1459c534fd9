package sqlite

import (
	"context"
	"database/sql"
	"encoding/json"
	"errors"
	"fmt"
	"time"

	"github.com/tpcscan/tpcscan/scan"
	"github.com/tpcscan/tpcscan/scan/campaign"
	"github.com/tpcscan/tpcscan/store"
)

// CreateCampaign stores a campaign and its events, shuffled on the ring by
// the campaign's seed, and returns its ID. A campaign's schema is frozen
// here: it cannot change later.
func (s *Store) CreateCampaign(ctx context.Context, c scan.Campaign, events []scan.CampaignEvent) (int64, error) {
	if err := campaign.Check(c, events); err != nil {
		return 0, fmt.Errorf("create campaign %q: %w", c.Name, err)
	}
	schema, err := json.Marshal(c.Schema)
	if err != nil {
		return 0, fmt.Errorf("create campaign %q: %w", c.Name, err)
	}
	roster, err := json.Marshal(nonNil(c.Scanners))
	if err != nil {
		return 0, fmt.Errorf("create campaign %q: %w", c.Name, err)
	}
	if c.Created.IsZero() {
		c.Created = time.Now()
	}
	pos := campaign.Positions(c.Seed, len(events))
	var id int64
	err = s.tx(ctx, func(tx *sql.Tx) error {
		res, err := tx.ExecContext(ctx, `INSERT INTO campaigns (name, dataset, mode, per_event, blind, adaptive, seed, schema_json, schema_version, instructions, scanners, n_events, created)
			VALUES (?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?)`,
			c.Name, c.Dataset, c.Mode, c.PerEvent, b2i(c.Blind), b2i(c.Adaptive), c.Seed, string(schema), c.Schema.Version, c.Instructions, string(roster), len(events), stamp(c.Created))
		if isUnique(err) {
			return fmt.Errorf("a campaign named %q exists already: %w", c.Name, store.ErrConflict)
		}
		if err != nil {
			return err
		}
		if id, err = res.LastInsertId(); err != nil {
			return err
		}
		st, err := tx.PrepareContext(ctx, `INSERT INTO events (campaign_id, event_id, ord, pos, needed, selection) VALUES (?, ?, ?, ?, ?, ?)`)
		if err != nil {
			return err
		}
		defer st.Close()
		for i, e := range events {
			var sel any
			if e.Selection != nil {
				b, err := json.Marshal(e.Selection)
				if err != nil {
					return fmt.Errorf("event %s: selection: %w", e.EventID, err)
				}
				sel = string(b)
			}
			if _, err := st.ExecContext(ctx, id, e.EventID, i, pos[i], c.PerEvent, sel); err != nil {
				return fmt.Errorf("event %s: %w", e.EventID, err)
			}
		}
		return nil
	})
	if err != nil {
		return 0, fmt.Errorf("create campaign %q: %w", c.Name, err)
	}
	return id, nil
}

func nonNil(s []string) []string {
	if s == nil {
		return []string{}
	}
	return s
}

const campaignCols = `id, name, dataset, mode, per_event, blind, adaptive, seed, schema_json, instructions, scanners, n_events, created`

// scanCampaign reads one campaigns row.
func scanCampaign(row interface{ Scan(...any) error }) (scan.Campaign, int, error) {
	var (
		c                     scan.Campaign
		blind, adaptive, n    int
		schema, roster, creat string
	)
	if err := row.Scan(&c.ID, &c.Name, &c.Dataset, &c.Mode, &c.PerEvent, &blind, &adaptive, &c.Seed, &schema, &c.Instructions, &roster, &n, &creat); err != nil {
		return c, 0, err
	}
	c.Blind, c.Adaptive = blind != 0, adaptive != 0
	if err := json.Unmarshal([]byte(schema), &c.Schema); err != nil {
		return c, 0, fmt.Errorf("campaign %q: stored schema: %w", c.Name, err)
	}
	if err := json.Unmarshal([]byte(roster), &c.Scanners); err != nil {
		return c, 0, fmt.Errorf("campaign %q: stored roster: %w", c.Name, err)
	}
	if len(c.Scanners) == 0 {
		c.Scanners = nil
	}
	var err error
	c.Created, err = parseStamp(creat)
	return c, n, err
}

// Campaign returns one campaign.
func (s *Store) Campaign(ctx context.Context, id int64) (scan.Campaign, error) {
	return s.campaignWhere(ctx, "id = ?", id, fmt.Sprintf("campaign %d", id))
}

// CampaignByName looks a campaign up by name.
func (s *Store) CampaignByName(ctx context.Context, name string) (scan.Campaign, error) {
	return s.campaignWhere(ctx, "name = ?", name, fmt.Sprintf("campaign %q", name))
}

func (s *Store) campaignWhere(ctx context.Context, where string, arg any, what string) (scan.Campaign, error) {
	var c scan.Campaign
	err := s.view(ctx, func(tx *sql.Tx) error {
		var err error
		c, _, err = scanCampaign(tx.QueryRowContext(ctx, `SELECT `+campaignCols+` FROM campaigns WHERE `+where, arg))
		return err
	})
	if errors.Is(err, sql.ErrNoRows) {
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
	err := s.view(ctx, func(tx *sql.Tx) error {
		rows, err := tx.QueryContext(ctx, `SELECT `+campaignCols+` FROM campaigns ORDER BY id`)
		if err != nil {
			return err
		}
		defer rows.Close()
		for rows.Next() {
			c, _, err := scanCampaign(rows)
			if err != nil {
				return err
			}
			cs = append(cs, c)
		}
		return rows.Err()
	})
	if err != nil {
		return nil, fmt.Errorf("list campaigns: %w", err)
	}
	return cs, nil
}

// info returns the campaign facts the write paths need, cached: a
// campaign's rows never change after creation.
func (s *Store) info(ctx context.Context, tx *sql.Tx, id int64) (campaignInfo, error) {
	s.mu.Lock()
	ci, ok := s.schemas[id]
	s.mu.Unlock()
	if ok {
		return ci, nil
	}
	c, n, err := scanCampaign(tx.QueryRowContext(ctx, `SELECT `+campaignCols+` FROM campaigns WHERE id = ?`, id))
	if errors.Is(err, sql.ErrNoRows) {
		return ci, fmt.Errorf("campaign %d: %w", id, store.ErrNotFound)
	}
	if err != nil {
		return ci, err
	}
	ci = campaignInfo{schema: c.Schema, mode: c.Mode, perEvent: c.PerEvent, adaptive: c.Adaptive, seed: c.Seed, nEvents: n, roster: c.Scanners}
	s.mu.Lock()
	s.schemas[id] = ci
	s.mu.Unlock()
	return ci, nil
}

// Events returns the campaign's events with their selection output, in
// the order they were given at creation.
func (s *Store) Events(ctx context.Context, campaignID int64) ([]scan.CampaignEvent, error) {
	var evs []scan.CampaignEvent
	err := s.view(ctx, func(tx *sql.Tx) error {
		if _, err := s.info(ctx, tx, campaignID); err != nil {
			return err
		}
		rows, err := tx.QueryContext(ctx, `SELECT event_id, selection FROM events WHERE campaign_id = ? ORDER BY ord`, campaignID)
		if err != nil {
			return err
		}
		defer rows.Close()
		for rows.Next() {
			var e scan.CampaignEvent
			var sel sql.NullString
			if err := rows.Scan(&e.EventID, &sel); err != nil {
				return err
			}
			if e.Selection, err = decodeSelection(sel); err != nil {
				return fmt.Errorf("event %s: %w", e.EventID, err)
			}
			evs = append(evs, e)
		}
		return rows.Err()
	})
	if err != nil {
		return nil, fmt.Errorf("read events of campaign %d: %w", campaignID, err)
	}
	return evs, nil
}

func decodeSelection(sel sql.NullString) (*scan.Selection, error) {
	if !sel.Valid {
		return nil, nil
	}
	var x scan.Selection
	if err := json.Unmarshal([]byte(sel.String), &x); err != nil {
		return nil, fmt.Errorf("stored selection: %w", err)
	}
	return &x, nil
}
