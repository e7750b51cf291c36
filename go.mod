module winnow

go 1.26

require (
	github.com/chromedp/cdproto v0.160.1 // test only: browser tests (network events)
	github.com/chromedp/chromedp v0.23.1 // test only: drives Debian's Chromium in the browser tests and benchmarks
	github.com/evanw/esbuild v0.28.2 // build time only: bundles site/ in scripts/sitebuild
	github.com/klauspost/compress v1.20.4 // gzip decompression of .nii.gz in core/nifti
	gonum.org/v1/gonum v0.17.0 // linear algebra (design rank, per-voxel solves) and special functions
)

require (
	github.com/go-json-experiment/json v0.0.0-20260213210345-44df1a37e875 // indirect
	golang.org/x/sys v0.0.0-20220715151400-c0bba94af5f8 // indirect
)
