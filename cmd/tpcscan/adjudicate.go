package main

import (
	"context"
	"fmt"
	"os"
	"strings"

	tea "github.com/charmbracelet/bubbletea"
	"github.com/charmbracelet/lipgloss"

	"github.com/tpcscan/tpcscan/render"
	"github.com/tpcscan/tpcscan/scan"
	"github.com/tpcscan/tpcscan/scan/dataset"
	"github.com/tpcscan/tpcscan/ui"
)

func adjudicateCommand() command {
	return command{
		name:    "adjudicate",
		summary: "decide the events scanners disagree on; campaign numbers on a second page",
		run: func(ctx context.Context, env *environ, args []string) error {
			fs := newFlags(env, "adjudicate", "--db FILE|URL [FLAGS]",
				"Lists the events where the scanners (or the scanners and the selection) disagree on the\n"+
					"class, most contested first, with every scanner's marks on the planes and their tags\n"+
					"side by side. Accept one scanner's label, or set the class with its schema key; the\n"+
					"decision is stored as the event's consensus (method \"adjudication\") with your name\n"+
					"and the time. Press s for the campaign's numbers, ? for every key.")
			db := fs.String("db", "", "campaign database: an SQLite `FILE` or a postgres:// URL (required)")
			campaign := fs.String("campaign", "", "campaign `NAME` (default: the only campaign in the database)")
			dir := fs.String("dataset", "", "dataset `DIR` (default: the folder recorded in the campaign)")
			who := fs.String("coordinator", "", "your `NAME`, stored with each decision (default: your login name)")
			color := fs.String("color", "auto", "colour tier: auto, "+strings.Join(render.TierNames(), ", "))
			keys := fs.String("keys", "", "key map `FILE` for the display keys (TOML; default "+ui.DefaultKeyMapPath()+" if it exists)")
			absent := fs.String("absent", "cosmic,none", "classes meaning no interaction, for scanning efficiency (empty: skip)")
			signal := fs.String("signal", "", "selection signal classes `A,B,...` (default: the class the selection calls most)")
			cl := fs.Float64("cl", 0.95, "confidence level of the intervals on the numbers page")
			if err := fs.Parse(args); err != nil {
				return err
			}
			if fs.NArg() != 0 || *db == "" {
				return usageError{"adjudicate needs --db and takes no arguments"}
			}
			if err := checkCL(*cl); err != nil {
				return err
			}
			tier, err := tierFlag(env, *color)
			if err != nil {
				return usageError{err.Error()}
			}
			km, err := keyMap(*keys)
			if err != nil {
				return err
			}
			name := *who
			if name == "" {
				name = loginName(env)
			}
			if strings.TrimSpace(name) == "" || scan.CleanText(name) != name {
				return usageError{"a coordinator name is needed (--coordinator NAME), without control characters"}
			}
			st, camp, err := openCampaign(ctx, *db, *campaign)
			if err != nil {
				return err
			}
			defer st.Close()
			folder := *dir
			if folder == "" {
				folder = camp.Dataset
			}
			ds, err := dataset.Open(folder)
			if err != nil {
				return fmt.Errorf("campaign %q: %w (give the folder with --dataset)", camp.Name, err)
			}
			absentList := splitList(*absent)
			if absentList == nil {
				absentList = []string{}
			}
			opts := ui.AdjudicateOptions{Store: st, CampaignID: camp.ID, Dataset: ds, Coordinator: name, Tier: tier,
				Keys: km, Context: ctx, Renderer: lipgloss.NewRenderer(os.Stdout),
				Numbers: ui.NumbersOptions{Absent: absentList, Signal: splitList(*signal), CL: *cl}}
			return runAdjudicator(ctx, opts)
		},
	}
}

// runAdjudicator runs the adjudication model until the coordinator quits
// or a signal arrives. Decisions are stored as they are made, so quitting
// loses nothing.
func runAdjudicator(ctx context.Context, opts ui.AdjudicateOptions) error {
	p := tea.NewProgram(ui.NewAdjudicator(opts), tea.WithAltScreen(), tea.WithContext(ctx))
	if _, err := p.Run(); err != nil && ctx.Err() == nil {
		return fmt.Errorf("adjudication: %w", err)
	}
	return nil
}
