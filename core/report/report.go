// Package report holds the run summary whose JSON keys the outside contract
// (the README's "summary.json" section) fixes. It only describes data; the
// pipeline in package analysis fills it in.
package report

// Version is the tool version written into every summary.
const Version = "0.1.0"

// Tool names the program that wrote a summary.
type Tool struct {
	Name    string `json:"name"`
	Version string `json:"version"`
}

// Summary is the content of DIR/summary.json.
type Summary struct {
	Tool       Tool       `json:"tool"`
	Dims       []int      `json:"dims"`           // all used dims, e.g. [64 64 36 160]
	VoxelMM    [3]float64 `json:"voxel_mm"`       // spacing along each array axis, mm
	TR         *float64   `json:"tr_s"`           // seconds; null at group level
	MaskVoxels int        `json:"mask_voxels"`    // in-mask voxels that were analysed
	DF         float64    `json:"df"`             // error degrees of freedom
	FWHMmm     [3]float64 `json:"fwhm_mm"`        // residual smoothness per axis, mm
	Resels     float64    `json:"resels"`         // R3 of the search volume
	Perms      *int       `json:"perms"`          // permutations done; null for parametric runs
	Seed       *uint64    `json:"seed,omitempty"` // seed of the permutations
	Warnings   []string   `json:"warnings"`
	NullCheck  *NullCheck `json:"null_check"`
	Motion     *Motion    `json:"motion"`

	// Additions beyond the stable minimum.
	Noise          string     `json:"noise,omitempty"`          // "ar1" or "ols"
	SampleFraction float64    `json:"sample_fraction"`          // scan k sampled at (k + f)·TR
	HighpassSec    float64    `json:"highpass_s"`               // 0: no drift columns
	SmoothMM       float64    `json:"smooth_mm"`                // applied FWHM, mm
	Excluded       *Excluded  `json:"excluded,omitempty"`       // voxels left out, by reason
	Inputs         []InputRef `json:"inputs,omitempty"`         // provenance of the inputs
	DesignColumns  []string   `json:"design_columns,omitempty"` // names in design.tsv order
	RhoMedian      *float64   `json:"ar1_median_rho,omitempty"` // median AR(1) coefficient in the mask
	ReselCounts    [4]float64 `json:"resel_counts"`             // R0..R3

	Contrasts []Contrast `json:"contrasts"`
}

// Excluded counts voxels that left the analysis mask.
type Excluded struct {
	NonFinite int `json:"non_finite"` // held a NaN or infinity in some volume
	Constant  int `json:"constant"`   // no variance over time
}

// InputRef records one input file for provenance.
type InputRef struct {
	Role   string `json:"role"` // "bold", "events", "confounds", "mask"
	Name   string `json:"name"`
	Bytes  int64  `json:"bytes"`
	SHA256 string `json:"sha256"`
}

// NullCheck is the measured familywise error of the user's settings on
// chance designs.
type NullCheck struct {
	Designs      int        `json:"designs"`
	WithFindings int        `json:"with_findings"`
	FWEEstimate  float64    `json:"fwe_estimate"`
	CI95         [2]float64 `json:"ci95"`
}

// Motion holds framewise displacement figures.
type Motion struct {
	MeanFDmm float64 `json:"mean_fd_mm"`
	MaxFDmm  float64 `json:"max_fd_mm"`
}

// Contrast is one contrast's inference.
type Contrast struct {
	Name            string    `json:"name"`
	Kind            string    `json:"kind"` // "t" or "F"
	Spec            string    `json:"spec"`
	DF              []float64 `json:"df"` // [ν] for t, [q, ν] for F
	Correction      string    `json:"correction"`
	Alpha           float64   `json:"alpha"`
	ClusterP        *float64  `json:"cluster_p,omitempty"`        // cluster-forming p, cluster methods only
	Corrected       bool      `json:"corrected"`                  // false only for "none"
	ThresholdSource string    `json:"threshold_source,omitempty"` // e.g. "rft", "bonferroni"
	StatThreshold   *float64  `json:"stat_threshold"`
	ZThreshold      *float64  `json:"z_threshold"`
	ClusterExtent   *int      `json:"cluster_extent_voxels,omitempty"` // minimum extent, cluster methods
	SurvivingVoxels int       `json:"surviving_voxels"`
	Clusters        []Cluster `json:"clusters"`
	Maps            Maps      `json:"maps"`
}

// Cluster is one connected component of surviving voxels.
type Cluster struct {
	Voxels      int        `json:"voxels"`
	VolumeMM3   float64    `json:"volume_mm3"`
	PeakIJK     [3]int     `json:"peak_ijk"` // 0-based voxel indices
	PeakMM      [3]float64 `json:"peak_mm"`  // world coordinates, mm
	PeakStat    float64    `json:"peak_stat"`
	PeakZ       float64    `json:"peak_z"`
	PCorrected  *float64   `json:"p_corrected"`
	LocalMaxima []Maximum  `json:"local_maxima,omitempty"`
}

// Maximum is a local maximum inside a cluster.
type Maximum struct {
	IJK  [3]int     `json:"ijk"`
	MM   [3]float64 `json:"mm"`
	Stat float64    `json:"stat"`
	Z    float64    `json:"z"`
}

// Maps names the files written for a contrast.
type Maps struct {
	Stat        string `json:"stat,omitempty"`
	Z           string `json:"z,omitempty"`
	Effect      string `json:"effect,omitempty"`
	SE          string `json:"se,omitempty"`
	Thresholded string `json:"thresholded,omitempty"`
	TFCE        string `json:"tfce,omitempty"`  // group level, tfce only
	PCorr       string `json:"pcorr,omitempty"` // group level: -log10 of the corrected p
}
