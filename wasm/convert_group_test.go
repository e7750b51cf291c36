package main

import (
	"errors"
	"strings"
	"testing"

	"winnow/core/analysis"
	"winnow/core/infer"
	"winnow/core/report"
)

// The page's switch asks for 40 chance designs (the setting); off is 0.
func TestNullCheckSwitch(t *testing.T) {
	for _, on := range []bool{false, true} {
		opt, err := Settings{NullCheck: on}.FitOptions()
		if err != nil {
			t.Fatal(err)
		}
		want := 0
		if on {
			want = 40
		}
		if opt.NullCheck != want {
			t.Errorf("switch %v: NullCheck %d, want %d", on, opt.NullCheck, want)
		}
	}
}

// NullCheckText relays the core's sentence, and its warning only when the
// interval's lower bound lies above alpha (the rule of nullcheck.Warning).
func TestNullCheckText(t *testing.T) {
	if s, w := NullCheckText(nil, 0.05); s != "" || w != "" {
		t.Errorf("nil record: %q, %q; want both empty", s, w)
	}
	// 2 of 40, Clopper-Pearson 95 % interval 0.0061-0.169 (scipy.stats.binomtest(2, 40).proportion_ci(), from memory).
	ok := report.NullCheck{Designs: 40, WithFindings: 2, FWEEstimate: 0.05, CI95: [2]float64{0.0061, 0.169}}
	s, w := NullCheckText(&ok, 0.05)
	if !strings.Contains(s, "2 of 40 chance designs produced a finding") || w != "" {
		t.Errorf("lower bound below alpha: %q, %q; want the sentence and no warning", s, w)
	}
	bad := report.NullCheck{Designs: 40, WithFindings: 12, FWEEstimate: 0.3, CI95: [2]float64{0.166, 0.465}}
	if _, w := NullCheckText(&bad, 0.05); !strings.Contains(w, "do not control the familywise error") {
		t.Errorf("lower bound 0.166 above alpha 0.05: warning %q", w)
	}
}

func TestGroupSettings(t *testing.T) {
	seed := uint64(7)
	opt, err := GroupSettings{Correct: "tfce", Perms: 100, Seed: &seed, Shard: 2, Shards: 3}.GroupOptions()
	if err != nil {
		t.Fatal(err)
	}
	if opt.Correct != infer.MethodTFCE || opt.Perms != 100 || *opt.Seed != 7 || opt.Shard != 2 || opt.Shards != 3 || opt.Workers != 1 {
		t.Errorf("options %+v", opt)
	}
	if opt, err := (GroupSettings{}).GroupOptions(); err != nil || opt.Correct != infer.MethodDefault || opt.Shards != 0 {
		t.Errorf("defaults: %+v, %v", opt, err)
	}
	for _, bad := range []GroupSettings{{Correct: "max"}, {Perms: -1}, {Shard: 4, Shards: 3}, {Shard: 0, Shards: 2}} {
		_, err := bad.GroupOptions()
		var ie *analysis.InputError
		if !errors.As(err, &ie) {
			t.Errorf("%+v: error %v, want an InputError naming the field", bad, err)
		}
	}
}
