package sim

import (
	"math"
	"math/rand/v2"
)

// eventRand returns the random stream of one event. Each event's stream
// depends only on the dataset seed and the event index (through a
// SplitMix64 mix of both), so events can be generated in any order and on
// any number of workers with identical output.
func eventRand(seed int64, index int) *rand.Rand {
	a := splitmix(uint64(seed) ^ 0x7461726e2d73696d) // "tarn-sim"
	b := splitmix(a ^ splitmix(uint64(index)+1))
	return rand.New(rand.NewPCG(a, b))
}

// splitmix is the SplitMix64 finaliser (Steele, Lea & Flood 2014).
func splitmix(z uint64) uint64 {
	z += 0x9e3779b97f4a7c15
	z = (z ^ (z >> 30)) * 0xbf58476d1ce4e5b9
	z = (z ^ (z >> 27)) * 0x94d049bb133111eb
	return z ^ (z >> 31)
}

// moyalMean is the mean of the standard Moyal distribution, γ_E + ln 2.
const moyalMean = 0.57721566490153286 + math.Ln2

// moyal draws from the standard Moyal density exp(−(λ + e^−λ)/2)/√(2π),
// a closed-form approximation of the Landau density with its mode at 0
// (Moyal 1955). If Z is standard normal, e^−λ = Z² is χ² with one degree
// of freedom, so λ = −ln Z².
func moyal(r *rand.Rand) float64 {
	z := r.NormFloat64()
	z2 := max(z*z, 1e-300)
	return -math.Log(z2)
}

// poisson draws a Poisson count with mean mu: by multiplying uniforms for
// small means, from a rounded normal for large ones.
func poisson(r *rand.Rand, mu float64) int {
	if mu <= 0 {
		return 0
	}
	if mu > 30 {
		return max(0, int(math.Round(mu+math.Sqrt(mu)*r.NormFloat64())))
	}
	l, k, p := math.Exp(-mu), 0, r.Float64()
	for p > l {
		k++
		p *= r.Float64()
	}
	return k
}

// expo draws an exponential distance with mean lambda.
func expo(r *rand.Rand, lambda float64) float64 { return -lambda * math.Log(1-r.Float64()) }
