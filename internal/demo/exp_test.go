package demo
import ("testing";"math")
func TestExpHops(t *testing.T){
	for _, f := range []Faults{{CouplingScale:0.1},{CouplingScale:0.1,EpsShift:-0.02},{CouplingScale:0.05,EpsShift:-0.02},{CouplingScale:0.1,EpsShift:-0.025},{CouplingScale:0.2,EpsShift:-0.025}} {
		for _, nr := range []int{0,1} {
		for seed:=uint64(1); seed<=3; seed++ {
		m:=Tarnol(); m.Faults=f; m.Faults.NoRescaleEvery=nr
		acc,fr,steps:=0,0,0; mingap:=1.0; gmin,gmax:=1.0,0.0
		var e0, emax float64
		m.Run(seed, 20000, 0.1*41.34137333518, 300, func(s *Step){ steps++
			e:=s.Kinetic+s.Energies[s.Active]; if s.N==0 {e0=e}; emax=math.Max(emax, math.Abs(e-e0))
			g:=s.Energies[1]-s.Energies[0]; mingap=math.Min(mingap,g)
			if s.HopTo>=0 { if s.Frustrated {fr++} else {acc++; gmin=math.Min(gmin,g); gmax=math.Max(gmax,g)} } })
		t.Logf("cs %.2f eps %.3f nr %d seed %d: accepted %d frustrated %d mingap %.4f hopgap %.4f-%.4f maxdE %.3g", f.CouplingScale, f.EpsShift, nr, seed, acc, fr, mingap, gmin, gmax, emax)
		}}
	}
}
