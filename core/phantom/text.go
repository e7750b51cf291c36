package phantom

import (
	"bytes"
	"fmt"
	"math"
	"sort"
	"strconv"
	"strings"
)

// confoundNames are the column names of ConfoundsTSV, in order.
var confoundNames = [6]string{"trans_x", "trans_y", "trans_z", "rot_x", "rot_y", "rot_z"}

type block struct {
	onset, duration float64
	cond            string
}

// blocks lists the task blocks in time order.
func (s *Scenario) blocks() []block {
	var out []block
	for _, c := range s.Conditions {
		for i, o := range s.onsets[c] {
			out = append(out, block{o, s.durations[c][i], c})
		}
	}
	sort.Slice(out, func(a, b int) bool { return out[a].onset < out[b].onset })
	return out
}

func (s *Scenario) eventsTSV() []byte {
	var b bytes.Buffer
	b.WriteString("onset\tduration\ttrial_type\n")
	for _, e := range s.blocks() {
		fmt.Fprintf(&b, "%s\t%s\t%s\n", num(e.onset, 1), num(e.duration, 1), e.cond)
	}
	return b.Bytes()
}

func num(x float64, prec int) string { return strconv.FormatFloat(x, 'f', prec, 64) }

func (s *Scenario) confoundsTSV() []byte {
	var b bytes.Buffer
	for c, name := range confoundNames {
		if c > 0 {
			b.WriteByte('\t')
		}
		b.WriteString(name)
	}
	b.WriteByte('\n')
	for k := 0; k < s.Volumes; k++ {
		for c := range confoundNames {
			if c > 0 {
				b.WriteByte('\t')
			}
			x := s.confounds[c][k]
			if math.Abs(x) < 5e-7 {
				x = 0 // no "-0.000000"
			}
			b.WriteString(num(x, 6))
		}
		b.WriteByte('\n')
	}
	return b.Bytes()
}

func (s *Scenario) readme() []byte {
	var b bytes.Buffer
	p := func(format string, a ...any) { fmt.Fprintf(&b, format, a...) }
	runSec := float64(s.Volumes) * s.TR
	title := fmt.Sprintf("winnow demo scenario %q (seed %d)", s.Name, s.Seed)
	p("%s\n%s\n\n", title, strings.Repeat("=", len(title)))
	p("Everything here is synthetic and invented: no real person, scan or published\n")
	p("task. A participant watches a flickering lantern and either counts its flashes\n")
	p("(trial_type \"count\") or just watches it (\"watch\"); rest between blocks is\n")
	p("implicit (not listed in events.tsv).\n\n")

	p("Files\n-----\n")
	p("bold.nii.gz     the run, int16\n")
	p("events.tsv      onset, duration, trial_type (BIDS), seconds from the first volume\n")
	p("confounds.tsv   six motion-like traces, one row per volume\n")
	p("truth.nii.gz    1 inside the planted count > watch activation, 0 elsewhere\n\n")

	p("Grid and timing\n---------------\n")
	p("grid %d x %d x %d voxels of %g x %g x %g mm; world origin at voxel (%d, %d, %d);\n",
		s.Dims[0], s.Dims[1], s.Dims[2], s.VoxelMM[0], s.VoxelMM[1], s.VoxelMM[2], originI, originJ, originK)
	p("axes i -> +x (right), j -> +y (anterior), k -> +z (superior); qform and sform\n")
	p("codes %d (scanner), no rotation.\n", s.QformCode)
	p("TR %g s, %d volumes (%g s). Scan k is taken as sampled at (k + 0.5) * TR.\n\n", s.TR, s.Volumes, runSec)

	p("Design\n------\n")
	p("%d blocks of %g s, %d per condition, in a seeded random order with never three\n",
		2*blocksPerCond, blockSec, blocksPerCond)
	p("of a kind in a row; first block at %g s; rest gaps of 10, 12 and 14 s (three\n", firstOnsetSec)
	p("each, shuffled); rest until the end of the run after the last block.\n")
	for _, e := range s.blocks() {
		p("  %6.1f s  %4.1f s  %s\n", e.onset, e.duration, e.cond)
	}
	p("\n")

	p("Anatomy\n-------\n")
	p("An egg-shaped ellipsoidal head centred at (%g, %g, %g) mm with semi-axes\n",
		headCentre[0], headCentre[1], headCentre[2])
	p("%g (x, widening by %g%% towards the back), %g (y) and %g (z) mm, cut by the\n",
		headSemi[0], 100*eggFactor, headSemi[1], headSemi[2])
	p("field of view at the bottom. Shells: scalp %g mm, skull to %g mm, CSF to %g mm\n",
		skullInset, csfInset, brainInset)
	p("in from the surface. Inside: a grey-matter ribbon about 3 to 9 mm thick over\n")
	p("white matter, a midline fissure, two lateral ventricles and two deep grey\n")
	p("nuclei. Baselines: grey %g, white %g, deep grey %g, CSF %g, scalp %g,\n",
		tissueIntensity[labGM], tissueIntensity[labWM], tissueIntensity[labDeepGM],
		tissueIntensity[labCSF], tissueIntensity[labScalp])
	p("skull %g, times a smooth texture (SD about 3.5 %%), a receive-coil brightening\n",
		tissueIntensity[labSkull])
	p("towards the surface (up to 8 %%) and a frontal dropout (-45 %% at (0, 44, -42) mm),\n")
	p("then blurred (Gaussian, sigma %g voxel) for partial volume.\n\n", pvSigmaVox)

	p("Planted responses\n-----------------\n")
	p("Each condition's boxcar is convolved with the double-gamma HRF\n")
	p("h(t) = g(t; 6, 1) - g(t; 16, 1) / 6 (gamma densities, shape and scale 1 s, support\n")
	p("32 s) and divided by its integral over [0, 32] s, so a sustained block settles\n")
	p("at 1; that time course times the percent below times the local baseline is\n")
	p("added to every planted voxel. Regions are spheres restricted to grey and white\n")
	p("matter, with a flat amplitude inside:\n\n")
	p("  %-26s %-14s %-22s %7s %6s %6s %7s %s\n", "region", "centre ijk", "centre mm", "radius", "count", "watch", "voxels", "truth")
	for _, bl := range s.Blobs {
		truth := "no"
		if bl.InTruth {
			truth = "yes"
		}
		p("  %-26s %-14s %-22s %5gmm %5g%% %5g%% %7d %s\n", bl.Name,
			fmt.Sprintf("(%d, %d, %d)", bl.IJK[0], bl.IJK[1], bl.IJK[2]),
			fmt.Sprintf("(%g, %g, %g)", bl.MM[0], bl.MM[1], bl.MM[2]),
			bl.RadiusMM, bl.Percent[0], bl.Percent[1], bl.Voxels, truth)
	}
	nTruth := 0
	for _, v := range s.Truth {
		if v != 0 {
			nTruth++
		}
	}
	p("\ntruth.nii.gz marks the %d voxels of the regions with \"truth yes\" (count above\n", nTruth)
	p("watch). The occipital pair responds equally to both conditions, so it appears in\n")
	p("the main effects of count and of watch but not in count - watch.\n\n")

	d := s.driftInfo
	p("Noise and nuisance\n------------------\n")
	p("Noise: white Gaussian noise blurred with a separable Gaussian (FWHM %g voxels,\n", noiseFWHMVox)
	p("half-width %d voxels), rescaled to unit variance, made AR(1) in time with\n", noiseRadius)
	p("rho = %g, times %g %% of the local baseline (all of the head). Deviates come\n", noiseRho, 100*noiseFrac)
	p("from a 65536-entry inverse normal table (truncated at +-4.3 SD) driven by PCG.\n")
	p("Drift: a fraction of the baseline (spatially modulated by a smooth field, SD\n")
	p("about 25 %%) equal to %.4f * (2t/T - 1) + %.4f * cos(2 pi t / %.1f s + %.3f),\n", d.lin, d.amp, d.period, d.phase)
	p("t the scan time and T = %g s.\n", runSec)
	p("Motion-like traces: six smoothed random walks starting at 0 (translations in\n")
	p("mm, rotations in degrees), peak |trans| under 0.25 mm and |rot| under 0.12 deg.\n")
	p("They do not move the image; trans_z changes the intensity by %g %% of the\n", 100*motionEffect)
	p("baseline per %g mm at the top and bottom of the head (proportional to height).\n", motionRef)
	p("Background: Rician, the magnitude of the blurred baseline plus complex Gaussian\n")
	p("noise of SD %g per channel.\n", float64(bgSigma))
	p("Values are rounded to whole numbers in the int16 range.\n\n")

	p("Expected result\n---------------\n")
	p("The contrast %q should find the three truth regions\n", s.Contrast)
	p("(left lateral frontal, left medial frontal, right parietal) and nothing else;\n")
	p("\"watch=watch\" should show the occipital pair.\n")
	p("Example: winnow fit --bold bold.nii.gz --events events.tsv --confounds confounds.tsv \\\n")
	p("  --contrast %q --out result\n", s.Contrast)
	return b.Bytes()
}
