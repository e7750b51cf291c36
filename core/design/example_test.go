package design_test

import (
	"fmt"

	"winnow/core/design"
)

func ExampleBuild() {
	conds := []design.Condition{
		{Name: "naming", Onsets: []float64{0, 40, 80, 120}, Durations: []float64{20, 20, 20, 20},
			Modulators: map[string][]float64{"rt": {0.61, 0.74, 0.58, 0.69}}},
		{Name: "scrambled", Onsets: []float64{20, 60, 100, 140}, Durations: []float64{20, 20, 20, 20}},
	}
	motion := make([]float64, 100)
	for i := range motion {
		motion[i] = 0.01 * float64(i%9)
	}
	d, err := design.Build(conds, design.Options{
		Volumes:     100,
		TR:          2,
		HRFDerivs:   true,
		Modulate:    []string{"rt"},
		HighpassSec: 128,
		Confounds:   []design.Confound{{Name: "trans_x", Values: motion}},
	})
	if err != nil {
		fmt.Println(err)
		return
	}
	for _, c := range d.Columns {
		fmt.Printf("%-16s %s\n", c.Name, c.Kind)
	}
	// Output:
	// naming           condition
	// naming_deriv     temporal
	// naming_disp      dispersion
	// naming_x_rt      modulator
	// scrambled        condition
	// scrambled_deriv  temporal
	// scrambled_disp   dispersion
	// trans_x          confound
	// cosine_01        drift
	// cosine_02        drift
	// cosine_03        drift
	// intercept        intercept
}
