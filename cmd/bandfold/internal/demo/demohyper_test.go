package demo_test

import (
	"bandfold/cmd/bandfold/internal/demo"
	"bandfold/cmd/bandfold/internal/jobtest"
	"context"
	"testing"
)

// TestDemoHyper: on the invented cube (noise known by construction: the
// scenario renders the noise-free cube), reconstruction from k MNF
// components is closer to the noise-free cube than from k principal
// components, which a few bands of much higher noise pull towards
// themselves (Green et al. 1988, section IV). Both must improve on the
// noisy cube itself.
func TestDemoHyper(t *testing.T) {
	o := demo.DemoOptions{Dir: t.TempDir(), Size: 512, Seed: 3}
	c, err := demo.WriteScenario(context.Background(), jobtest.TestEnv, &o)
	if err != nil {
		t.Fatal(err)
	}
	r, err := demo.RunHyperDemo(context.Background(), jobtest.TestEnv, &o, c)
	if err != nil {
		t.Fatal(err)
	}
	if r.Bands != 120-len(r.PCA.Basis.Excluded) || len(r.MNF.Basis.Excluded) != len(r.PCA.Basis.Excluded) || r.Bands > 110 || r.Bands < 90 {
		t.Errorf("%d bands kept, %d and %d excluded", r.Bands, len(r.PCA.Basis.Excluded), len(r.MNF.Basis.Excluded))
	}
	if !(r.RMSEMNF < r.RMSEPCA && r.RMSEPCA < r.RMSENoisy) || r.Pixels == 0 {
		t.Errorf("rmse noisy %.2f, PCA %.2f, MNF %.2f over %d pixels: want MNF < PCA < noisy", r.RMSENoisy, r.RMSEPCA, r.RMSEMNF, r.Pixels)
	}
	if len(r.PCA.Basis.WavelengthsNM) != r.Bands {
		t.Errorf("basis has %d wavelengths for %d bands", len(r.PCA.Basis.WavelengthsNM), r.Bands)
	}
}
