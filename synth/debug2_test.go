package synth

import (
	"fmt"
	"testing"
)

func TestDebugRamp(t *testing.T) {
	gs, _ := Generate(DemoConfig())
	g := gs[1]
	tr := g.Recording.Trials[2]
	f, tg := tr.Force.Values, tr.ForceTarget.Values
	mvc := g.Truth.MVCN
	for _, u := range g.Truth.Trials[2].Arrays[0].Units {
		d := u.Discharges
		a, b := d[0], d[len(d)-1]
		fmt.Printf("pool=%d rte=%.1f truthRec=%.2f truthDer=%.2f | first t=%.3f F=%.2f T=%.2f | last t=%.3f F=%.2f T=%.2f\n", u.Pool, u.ExcitationThresholdPct, u.RecruitPctMVC, u.DerecruitPctMVC,
			float64(a)/2048, 100*f[a]/mvc, 100*tg[a]/mvc, float64(b)/2048, 100*f[b]/mvc, 100*tg[b]/mvc)
	}
}
