package ui

import (
	"github.com/charmbracelet/bubbles/help"
	"github.com/charmbracelet/lipgloss"
	"github.com/muesli/termenv"

	"github.com/tpcscan/tpcscan/render"
)

// Styles are the chrome's lipgloss styles, built per session from that
// session's renderer so that an SSH session never uses the server's
// terminal profile. Plane images are never styled through lipgloss.
type Styles struct {
	Title    lipgloss.Style
	TitleDim lipgloss.Style
	Saved    lipgloss.Style
	Saving   lipgloss.Style
	Error    lipgloss.Style
	Readout  lipgloss.Style
	Status   lipgloss.Style
	Panel    lipgloss.Style
	Heading  lipgloss.Style
	Chosen   lipgloss.Style
	Dim      lipgloss.Style
	Warn     lipgloss.Style
	Help     help.Styles
}

// NewStyles builds the styles on r, pinning r's colour profile to the
// station's tier so chrome and images agree.
func NewStyles(r *lipgloss.Renderer, tier render.Tier) Styles {
	r.SetColorProfile(profileOf(tier))
	ns := r.NewStyle
	s := Styles{
		Title:    ns().Bold(true).Reverse(true),
		TitleDim: ns().Reverse(true),
		Saved:    ns().Bold(true).Foreground(lipgloss.Color("2")),
		Saving:   ns().Bold(true).Foreground(lipgloss.Color("3")),
		Error:    ns().Bold(true).Foreground(lipgloss.Color("1")),
		Readout:  ns(),
		Status:   ns().Faint(true),
		Panel:    ns().Border(lipgloss.NormalBorder(), false, false, false, true).PaddingLeft(1),
		Heading:  ns().Bold(true).Underline(true),
		Chosen:   ns().Bold(true).Reverse(true),
		Dim:      ns().Faint(true),
		Warn:     ns().Bold(true).Foreground(lipgloss.Color("3")),
	}
	h := help.New().Styles
	h.ShortKey = ns().Bold(true)
	h.ShortDesc = ns().Faint(true)
	h.ShortSeparator = ns().Faint(true)
	h.FullKey = ns().Bold(true)
	h.FullDesc = ns()
	h.FullSeparator = ns().Faint(true)
	h.Ellipsis = ns().Faint(true)
	s.Help = h
	return s
}

// profileOf maps a render tier to a lipgloss colour profile.
func profileOf(t render.Tier) termenv.Profile {
	switch t {
	case render.TierTrueColor:
		return termenv.TrueColor
	case render.Tier256:
		return termenv.ANSI256
	case render.Tier16:
		return termenv.ANSI
	default:
		return termenv.Ascii
	}
}
