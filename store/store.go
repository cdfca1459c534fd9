// Package store keeps campaigns, passes, label revisions and consensus
// labels. Store is the task-shaped interface every backend implements; it
// uses only scan's domain types, so SQLite (the embedded default) and
// PostgreSQL (for a collaboration) are interchangeable.
package store

import (
	"context"
	"errors"

	"github.com/tpcscan/tpcscan/scan"
)

// Sentinel errors a caller can branch on.
var (
	ErrNotFound = errors.New("not found")
	// ErrNoWork means the scanner has no event left to scan in the campaign.
	ErrNoWork = errors.New("no event left for this scanner")
	// ErrConflict means the action contradicts the stored state (e.g. a
	// revision for a pass that belongs to another scanner).
	ErrConflict = errors.New("conflict")
	// ErrTooNew means the database was written by a newer tpcscan.
	ErrTooNew = errors.New("database was written by a newer tpcscan")
	// ErrUnknownScanner means the campaign has a roster and the scanner is
	// not on it.
	ErrUnknownScanner = errors.New("scanner is not on the campaign's roster")
)

// Store is a campaign database. Every method is one transaction; all are
// safe for concurrent use, including from several processes.
type Store interface {
	// CreateCampaign stores a campaign and its events and returns its ID.
	CreateCampaign(ctx context.Context, c scan.Campaign, events []scan.CampaignEvent) (int64, error)
	// Campaign returns one campaign; CampaignByName looks it up by name.
	Campaign(ctx context.Context, id int64) (scan.Campaign, error)
	CampaignByName(ctx context.Context, name string) (scan.Campaign, error)
	Campaigns(ctx context.Context) ([]scan.Campaign, error)
	// Events returns the campaign's events with their selection output.
	Events(ctx context.Context, campaignID int64) ([]scan.CampaignEvent, error)

	// NextPass returns the scanner's open pass (assigned or draft) if there
	// is one, else assigns the next event that still needs a scanner —
	// never one this scanner already has, never beyond the campaign's K
	// (plus adaptive rounds) — in the scanner's shuffled order. It returns
	// ErrNoWork when nothing is left.
	NextPass(ctx context.Context, campaignID int64, scanner string) (scan.Pass, error)
	// Pass returns one pass with its latest label.
	Pass(ctx context.Context, passID int64) (scan.Pass, error)
	// Passes returns every pass of a campaign with its latest label,
	// ordered by event then pass ID.
	Passes(ctx context.Context, campaignID int64) ([]scan.Pass, error)
	// ScannerPasses returns one scanner's passes in the order they were
	// assigned (for "back to the previous event" and progress).
	ScannerPasses(ctx context.Context, campaignID int64, scanner string) ([]scan.Pass, error)
	// SaveRevision appends a revision to a pass owned by scanner and moves
	// the pass to the revision's state; it returns the stored revision.
	SaveRevision(ctx context.Context, passID int64, scanner string, rev scan.Revision) (scan.Revision, error)
	// Revisions returns a pass's revisions, oldest first.
	Revisions(ctx context.Context, passID int64) ([]scan.Revision, error)
	// AddPass assigns an extra pass of an event (adaptive rounds, or a
	// coordinator's request) to no one yet; NextPass hands it out.
	AddPass(ctx context.Context, campaignID int64, eventID string, round int) error

	// SetConsensus stores (appends) a consensus label; the latest per event
	// and method wins. Consensus returns the latest per event for a method
	// ("" = any method, adjudication first).
	SetConsensus(ctx context.Context, c scan.Consensus) error
	Consensus(ctx context.Context, campaignID int64, method string) ([]scan.Consensus, error)

	// SaveResume keeps an opaque per-scanner state (the event and view the
	// scanner was on) so that a new session resumes exactly there; Resume
	// returns it, or ErrNotFound.
	SaveResume(ctx context.Context, campaignID int64, scanner string, state []byte) error
	Resume(ctx context.Context, campaignID int64, scanner string) ([]byte, error)

	// Close releases the database.
	Close() error
}
