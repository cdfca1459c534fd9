package sqlite

import (
	"context"
	"database/sql"
	"encoding/json"
	"errors"
	"fmt"
	"slices"
	"time"

	"github.com/tpcscan/tpcscan/scan"
	"github.com/tpcscan/tpcscan/store"
)

// SetConsensus appends a consensus label; the latest per event and method
// wins when read back.
func (s *Store) SetConsensus(ctx context.Context, c scan.Consensus) error {
	if c.Method == "" {
		return fmt.Errorf("set consensus of %s: no method", c.EventID)
	}
	label, err := json.Marshal(c.Label)
	if err != nil {
		return fmt.Errorf("set consensus of %s: %w", c.EventID, err)
	}
	if c.At.IsZero() {
		c.At = time.Now()
	}
	err = s.tx(ctx, func(tx *sql.Tx) error {
		if _, err := s.info(ctx, tx, c.CampaignID); err != nil {
			return err
		}
		_, err := tx.ExecContext(ctx, `INSERT INTO consensus (campaign_id, event_id, method, label, posterior, decided_by, at) VALUES (?, ?, ?, ?, ?, ?, ?)`,
			c.CampaignID, c.EventID, c.Method, string(label), c.Posterior, c.By, stamp(c.At))
		if isForeignKey(err) {
			return fmt.Errorf("event %s is not in campaign %d: %w", c.EventID, c.CampaignID, store.ErrNotFound)
		}
		return err
	})
	if err != nil {
		return fmt.Errorf("set consensus of %s: %w", c.EventID, err)
	}
	return nil
}

// Consensus returns the latest consensus label per event for a method, or
// with method "" the latest adjudication where there is one and else the
// latest label of any method; in campaign order.
func (s *Store) Consensus(ctx context.Context, campaignID int64, method string) ([]scan.Consensus, error) {
	type pick struct {
		c   scan.Consensus
		ord int
	}
	best := map[string]pick{}
	err := s.view(ctx, func(tx *sql.Tx) error {
		if _, err := s.info(ctx, tx, campaignID); err != nil {
			return err
		}
		rows, err := tx.QueryContext(ctx, `SELECT c.event_id, c.method, c.label, c.posterior, c.decided_by, c.at, e.ord
			FROM consensus c JOIN events e ON e.campaign_id = c.campaign_id AND e.event_id = c.event_id
			WHERE c.campaign_id = ? AND (? = '' OR c.method = ?) ORDER BY c.id`, campaignID, method, method)
		if err != nil {
			return err
		}
		defer rows.Close()
		for rows.Next() {
			x := scan.Consensus{CampaignID: campaignID}
			var label, at string
			var ord int
			if err := rows.Scan(&x.EventID, &x.Method, &label, &x.Posterior, &x.By, &at, &ord); err != nil {
				return err
			}
			if err := json.Unmarshal([]byte(label), &x.Label); err != nil {
				return fmt.Errorf("consensus of %s: stored label: %w", x.EventID, err)
			}
			if x.At, err = parseStamp(at); err != nil {
				return err
			}
			prev, ok := best[x.EventID]
			if !ok || prev.c.Method != "adjudication" || x.Method == "adjudication" {
				best[x.EventID] = pick{x, ord}
			}
		}
		return rows.Err()
	})
	if err != nil {
		return nil, fmt.Errorf("read consensus of campaign %d: %w", campaignID, err)
	}
	picks := make([]pick, 0, len(best))
	for _, p := range best {
		picks = append(picks, p)
	}
	out := make([]scan.Consensus, len(picks))
	slices.SortFunc(picks, func(a, b pick) int { return a.ord - b.ord })
	for i, p := range picks {
		out[i] = p.c
	}
	return out, nil
}

// SaveResume keeps a scanner's opaque resume state.
func (s *Store) SaveResume(ctx context.Context, campaignID int64, scanner string, state []byte) error {
	err := s.tx(ctx, func(tx *sql.Tx) error {
		if _, err := s.info(ctx, tx, campaignID); err != nil {
			return err
		}
		_, err := tx.ExecContext(ctx, `INSERT INTO resume (campaign_id, scanner, state, updated) VALUES (?, ?, ?, ?)
			ON CONFLICT (campaign_id, scanner) DO UPDATE SET state = excluded.state, updated = excluded.updated`,
			campaignID, scanner, nonNilBytes(state), stamp(time.Now()))
		return err
	})
	if err != nil {
		return fmt.Errorf("save resume state of %s: %w", scanner, err)
	}
	return nil
}

// Resume returns a scanner's resume state, or store.ErrNotFound.
func (s *Store) Resume(ctx context.Context, campaignID int64, scanner string) ([]byte, error) {
	var state []byte
	err := s.view(ctx, func(tx *sql.Tx) error {
		return tx.QueryRowContext(ctx, `SELECT state FROM resume WHERE campaign_id = ? AND scanner = ?`, campaignID, scanner).Scan(&state)
	})
	if errors.Is(err, sql.ErrNoRows) {
		return nil, fmt.Errorf("resume state of %s in campaign %d: %w", scanner, campaignID, store.ErrNotFound)
	}
	if err != nil {
		return nil, fmt.Errorf("read resume state of %s: %w", scanner, err)
	}
	return state, nil
}

func nonNilBytes(b []byte) []byte {
	if b == nil {
		return []byte{}
	}
	return b
}
