package agree

import (
	"context"
	"fmt"
	"math"
	"math/rand/v2"
	"runtime"
	"slices"
	"sync"
)

// CI is a confidence interval; NaN bounds mean undefined.
type CI struct{ Low, High float64 }

// AgreementCIs holds percentile bootstrap intervals for the statistics of an
// Agreement, pair by pair in the same order.
type AgreementCIs struct {
	Resamples        int
	CL               float64
	PercentAgreement CI
	Fleiss           CI
	Alpha            CI
	Kappa            []CI
	WeightedKappa    []CI
}

// Bootstrap resamples items with replacement b times and returns percentile
// intervals at confidence level cl (Efron & Tibshirani 1993, An
// Introduction to the Bootstrap, ch. 13). Resample i draws from its own
// generator seeded by (seed, i), so the result does not depend on how many
// workers run, only on the seed. Resamples where a statistic is undefined
// are left out of that statistic's interval, and a statistic undefined
// on the data has an undefined interval.
func Bootstrap(ctx context.Context, t *Table, opt Options, b int, seed uint64, cl float64) (AgreementCIs, error) {
	return bootstrap(ctx, t, opt, b, seed, cl, runtime.GOMAXPROCS(0), nil)
}

// BootstrapProgress is Bootstrap that reports progress(done, b) as
// resamples are handed to the workers (from one goroutine).
func BootstrapProgress(ctx context.Context, t *Table, opt Options, b int, seed uint64, cl float64, progress func(done, total int)) (AgreementCIs, error) {
	return bootstrap(ctx, t, opt, b, seed, cl, runtime.GOMAXPROCS(0), progress)
}

func bootstrap(ctx context.Context, t *Table, opt Options, b int, seed uint64, cl float64, workers int, progress func(done, total int)) (AgreementCIs, error) {
	if b < 1 {
		return AgreementCIs{}, fmt.Errorf("bootstrap: need at least one resample, got %d", b)
	}
	if !(cl > 0 && cl < 1) {
		return AgreementCIs{}, fmt.Errorf("bootstrap: confidence level %g is not in (0, 1)", cl)
	}
	if opt.Metric == "" {
		opt.Metric = Nominal
	}
	p := compress(t)
	res := make([]Agreement, b)
	workers = max(1, min(workers, b))
	var wg sync.WaitGroup
	next := make(chan int)
	for range workers {
		wg.Add(1)
		go func() {
			defer wg.Done()
			w := make([]float64, p.n())
			for i := range next {
				resample(p, w, seed, uint64(i))
				res[i] = agreeWeighted(t, p, w, opt)
			}
		}()
	}
	var err error
feed:
	for i := range b {
		select {
		case next <- i:
			if progress != nil {
				progress(i+1, b)
			}
		case <-ctx.Done():
			err = ctx.Err()
			break feed
		}
	}
	close(next)
	wg.Wait()
	if err != nil {
		return AgreementCIs{}, fmt.Errorf("bootstrap: %w", err)
	}
	ci := summarise(res, cl)
	undefinedWhereUndefined(&ci, agreeWeighted(t, p, p.weights(), opt))
	return ci, nil
}

// undefinedWhereUndefined blanks the interval of every statistic that is
// undefined on the data itself: resamples that happen to make it defined
// (e.g. drop the items that break Fleiss' equal-n design) say nothing
// about it.
func undefinedWhereUndefined(ci *AgreementCIs, a Agreement) {
	nan := CI{math.NaN(), math.NaN()}
	blank := func(c *CI, v float64) {
		if math.IsNaN(v) {
			*c = nan
		}
	}
	blank(&ci.PercentAgreement, a.PercentAgreement)
	blank(&ci.Fleiss, a.Fleiss)
	blank(&ci.Alpha, a.Alpha)
	for j, p := range a.Pairs {
		blank(&ci.Kappa[j], p.Kappa)
		blank(&ci.WeightedKappa[j], p.WeightedKappa)
	}
}

// resample fills w with the pattern counts of one bootstrap sample of the
// items: as many draws, with replacement, as there are items.
func resample(p *patterns, w []float64, seed, i uint64) {
	rng := rand.New(rand.NewPCG(seed, i))
	clear(w)
	n := len(p.of)
	for range n {
		w[p.of[rng.IntN(n)]]++
	}
}

func summarise(res []Agreement, cl float64) AgreementCIs {
	ci := AgreementCIs{Resamples: len(res), CL: cl}
	pick := func(f func(a Agreement) float64) CI {
		v := make([]float64, 0, len(res))
		for _, a := range res {
			if x := f(a); !math.IsNaN(x) {
				v = append(v, x)
			}
		}
		return percentile(v, cl)
	}
	ci.PercentAgreement = pick(func(a Agreement) float64 { return a.PercentAgreement })
	ci.Fleiss = pick(func(a Agreement) float64 { return a.Fleiss })
	ci.Alpha = pick(func(a Agreement) float64 { return a.Alpha })
	for j := range res[0].Pairs {
		ci.Kappa = append(ci.Kappa, pick(func(a Agreement) float64 { return a.Pairs[j].Kappa }))
		ci.WeightedKappa = append(ci.WeightedKappa, pick(func(a Agreement) float64 { return a.Pairs[j].WeightedKappa }))
	}
	return ci
}

// percentile returns the (1−cl)/2 and (1+cl)/2 empirical quantiles (linear
// interpolation between order statistics, type 7 of Hyndman & Fan 1996).
func percentile(v []float64, cl float64) CI {
	if len(v) == 0 {
		return CI{math.NaN(), math.NaN()}
	}
	slices.Sort(v)
	q := func(p float64) float64 {
		h := p * float64(len(v)-1)
		lo := int(math.Floor(h))
		if lo >= len(v)-1 {
			return v[len(v)-1]
		}
		return v[lo] + (h-float64(lo))*(v[lo+1]-v[lo])
	}
	return CI{q((1 - cl) / 2), q((1 + cl) / 2)}
}
