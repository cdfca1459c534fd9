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

// SetConsensus appends a consensus label; the latest per event and method wins.
func (s *Store) SetConsensus(ctx context.Context, c scan.Consensus) error {
	if c.Method == "" {
		return fmt.Errorf("set consensus of event %q: empty method", c.EventID)
	}
	label, err := json.Marshal(c.Label)
	if err != nil {
		return fmt.Errorf("set consensus of event %q: encode label: %w", c.EventID, err)
	}
	err = s.tx(ctx, func(tx pgx.Tx) error {
		if err := requireCampaign(ctx, tx, c.CampaignID); err != nil {
			return err
		}
		_, err := tx.Exec(ctx, `INSERT INTO consensus (campaign_id, event_id, method, label, posterior, decided_by, at)
			VALUES ($1, $2, $3, $4, $5, $6, coalesce($7, clock_timestamp()))`,
			c.CampaignID, c.EventID, c.Method, label, c.Posterior, c.By, nullTime(c.At))
		if pgCode(err) == codeForeignKey {
			return fmt.Errorf("no such event: %w", store.ErrNotFound)
		}
		return err
	})
	if err != nil {
		return fmt.Errorf("set consensus of event %q in campaign %d: %w", c.EventID, c.CampaignID, err)
	}
	return nil
}

// Consensus returns the latest label per event for a method, or for ""
// the latest adjudication where there is one and else the latest of any
// method; in campaign order.
func (s *Store) Consensus(ctx context.Context, campaignID int64, method string) ([]scan.Consensus, error) {
	var cs []scan.Consensus
	err := s.tx(ctx, func(tx pgx.Tx) error {
		if err := requireCampaign(ctx, tx, campaignID); err != nil {
			return err
		}
		rows, err := tx.Query(ctx, `SELECT x.campaign_id, x.event_id, x.method, x.label, x.posterior, x.decided_by, x.at
			FROM (SELECT DISTINCT ON (event_id) * FROM consensus
				WHERE campaign_id = $1 AND ($2 = '' OR method = $2)
				ORDER BY event_id, (method = 'adjudication') DESC, id DESC) x
			JOIN events e ON e.campaign_id = x.campaign_id AND e.event_id = x.event_id
			ORDER BY e.ord`, campaignID, method)
		if err != nil {
			return err
		}
		cs, err = pgx.CollectRows(rows, scanConsensus)
		return err
	})
	if err != nil {
		return nil, fmt.Errorf("read consensus of campaign %d: %w", campaignID, err)
	}
	return cs, nil
}

func scanConsensus(r pgx.CollectableRow) (scan.Consensus, error) {
	var c scan.Consensus
	var label []byte
	if err := r.Scan(&c.CampaignID, &c.EventID, &c.Method, &label, &c.Posterior, &c.By, &c.At); err != nil {
		return c, err
	}
	if err := json.Unmarshal(label, &c.Label); err != nil {
		return c, fmt.Errorf("consensus of event %q: decode label: %w", c.EventID, err)
	}
	return c, nil
}

// SaveResume keeps a scanner's opaque resume state.
func (s *Store) SaveResume(ctx context.Context, campaignID int64, scanner string, state []byte) error {
	if state == nil {
		state = []byte{}
	}
	err := s.tx(ctx, func(tx pgx.Tx) error {
		if err := requireCampaign(ctx, tx, campaignID); err != nil {
			return err
		}
		_, err := tx.Exec(ctx, `INSERT INTO resume (campaign_id, scanner, state, updated)
			VALUES ($1, $2, $3, clock_timestamp())
			ON CONFLICT (campaign_id, scanner) DO UPDATE SET state = excluded.state, updated = excluded.updated`,
			campaignID, scanner, state)
		if pgCode(err) == codeForeignKey {
			return fmt.Errorf("campaign %d: %w", campaignID, store.ErrNotFound)
		}
		return err
	})
	if err != nil {
		return fmt.Errorf("save resume state of %q: %w", scanner, err)
	}
	return nil
}

// Resume returns a scanner's resume state, or ErrNotFound.
func (s *Store) Resume(ctx context.Context, campaignID int64, scanner string) ([]byte, error) {
	var state []byte
	err := s.tx(ctx, func(tx pgx.Tx) error {
		return tx.QueryRow(ctx, "SELECT state FROM resume WHERE campaign_id = $1 AND scanner = $2",
			campaignID, scanner).Scan(&state)
	})
	if errors.Is(err, pgx.ErrNoRows) {
		return nil, fmt.Errorf("resume state of %q in campaign %d: %w", scanner, campaignID, store.ErrNotFound)
	}
	if err != nil {
		return nil, fmt.Errorf("read resume state of %q: %w", scanner, err)
	}
	return state, nil
}
