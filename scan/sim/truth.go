package sim

import "github.com/tpcscan/tpcscan/scan/detector"

// Interaction classes written to Truth.Class. They are the keys of the
// default label schema; "none" and "unusable" are never generated.
const (
	ClassNumuCC  = "numu-cc"
	ClassNueCC   = "nue-cc"
	ClassNCPi0   = "nc-pi0"
	ClassNCOther = "nc-other"
	ClassCosmic  = "cosmic"
)

// Classes lists the generated classes in a fixed order.
func Classes() []string {
	return []string{ClassNumuCC, ClassNueCC, ClassNCPi0, ClassNCOther, ClassCosmic}
}

// Truth is what the generator knows about one event; it is written as the
// event's truth JSON beside its planes.
type Truth struct {
	Event string `json:"event"`
	Class string `json:"class"`
	// NeutrinoGeV is the neutrino energy (0 for cosmic-only windows).
	NeutrinoGeV float64 `json:"neutrino_gev,omitempty"`
	// Vertex is the interaction point; nil for cosmic-only windows.
	Vertex *Vertex `json:"vertex,omitempty"`
	// Particles are the visible-level particles: the interaction's final
	// state, photons from π0 decays, Michel electrons and the cosmic muons.
	// Shower constituents and δ-rays belong to the particle that made them.
	// Particle i has ID i+1, which is also its pixel-truth code.
	Particles []Particle `json:"particles"`
	// PixelCodes documents the pixel-truth arrays beside the planes.
	PixelCodes string `json:"pixel_codes"`
}

// pixelCodesDoc is the text of Truth.PixelCodes.
const pixelCodesDoc = "pixel value = id of the particle whose charge dominates the pixel (particles[id-1]); 0 = no signal above 1 ADC"

// Vertex is a point in cm and where each plane sees it.
type Vertex struct {
	Cm     [3]float64 `json:"cm"`
	Planes []PlaneHit `json:"planes"`
}

// PlaneHit is a point's continuous wire and tick on one plane (detector
// numbering, not image-local).
type PlaneHit struct {
	Plane detector.Role `json:"plane"`
	Wire  float64       `json:"wire"`
	Tick  float64       `json:"tick"`
}

// Particle is one truth particle.
type Particle struct {
	ID     int        `json:"id"`
	Type   string     `json:"type"` // muon, pion, proton, electron, photon, pi0
	PDG    int        `json:"pdg"`
	Start  [3]float64 `json:"start"`
	End    [3]float64 `json:"end"` // stop, exit, nuclear interaction or (photons) first interaction point
	KEMeV  float64    `json:"ke_mev"`
	Parent int        `json:"parent"` // id of the parent particle, 0 for primaries
	// T0Us is the particle's time relative to the trigger in µs: 0 for the
	// interaction, anywhere in the readout for cosmic muons.
	T0Us float64 `json:"t0_us"`
	// Origin is "interaction" or "cosmic".
	Origin string `json:"origin"`
	// Stopped is true when the particle ranged out inside the active volume.
	Stopped bool `json:"stopped,omitempty"`
	// Interacted is true when a proton or pion track ended in a nuclear
	// interaction at End; its visible products have it as parent.
	Interacted bool `json:"interacted,omitempty"`
}
