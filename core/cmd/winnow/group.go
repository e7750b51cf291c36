package main

import (
	"context"
	"errors"
	"fmt"
	"io"
	"os"
	"os/signal"
	"path/filepath"
	"strconv"
	"strings"

	"winnow/core/analysis"
	"winnow/core/infer"
)

// runGroup is the group command: the second-level model over per-subject effect maps.
func runGroup(args []string, stdout, stderr io.Writer) error {
	fs := newFlags("group", stderr)
	mapsFlag := fs.String("maps", "", "per-subject 3D effect maps, comma-separated, in design-row order (required)")
	designf := fs.String("design", "", "design table (TSV, one row per map) [one-sample: column mean]")
	maskf := fs.String("mask", "", "analysis mask on the maps' grid [voxels non-zero in every map]")
	out := fs.String("out", "", "output folder (required)")
	var contrasts listFlag
	fs.Var(&contrasts, "contrast", "contrast NAME=EXPR over design columns (repeatable) [mean=mean without --design]")
	correct := fs.String("correct", "fwe-perm", "correction: "+strings.Join(groupMethods(), ", "))
	perms := fs.Int("perms", analysis.DefaultPerms, "relabellings, the identity included (all unique ones when fewer)")
	seed := fs.Uint64("seed", analysis.DefaultGroupSeed, "random seed of the relabellings")
	alpha := fs.Float64("alpha", analysis.DefaultAlpha, "familywise error or FDR level")
	clusterP := fs.Float64("cluster-p", analysis.DefaultClusterP, "cluster-forming p (cluster methods)")
	workers := fs.Int("workers", 0, "goroutines for the permutations [all cores]")
	shard := fs.String("shard", "", "K/N: run only the K-th of N slices of the relabellings (join with merge)")
	if err := parse(fs, args); err != nil {
		return err
	}
	if fs.NArg() > 0 {
		return usageError{fmt.Sprintf("group: unexpected argument %q", fs.Arg(0))}
	}
	if *mapsFlag == "" {
		return usageError{"group: --maps is required"}
	}
	if *out == "" {
		return usageError{"group: --out DIR is required"}
	}
	m, err := infer.ParseMethod(*correct)
	if err != nil {
		return &analysis.InputError{File: "--correct", Err: err}
	}
	if *workers < 0 {
		return &analysis.InputError{File: "--workers", Err: fmt.Errorf("%d; want 0 (all cores) or a positive count", *workers)}
	}
	opt := analysis.GroupOptions{
		Contrasts: contrasts,
		Correct:   m,
		Perms:     *perms,
		Seed:      seed,
		Alpha:     *alpha,
		ClusterP:  *clusterP,
		Workers:   *workers,
	}
	if *shard != "" {
		k, n, err := parseShard(*shard)
		if err != nil {
			return &analysis.InputError{File: "--shard", Err: err}
		}
		opt.Shard, opt.Shards = k, n
	}
	var files inputFiles
	defer files.close()
	var in analysis.GroupInputs
	for _, name := range strings.Split(*mapsFlag, ",") {
		name = strings.TrimSpace(name)
		if name == "" {
			return &analysis.InputError{File: "--maps", Err: errors.New("an empty file name in the list; want F,F,...")}
		}
		f, err := files.open(name)
		if err != nil {
			return err
		}
		in.Maps = append(in.Maps, *f)
	}
	if in.Design, err = files.optional(*designf); err != nil {
		return err
	}
	if in.Mask, err = files.optional(*maskf); err != nil {
		return err
	}
	ctx, stop := signal.NotifyContext(context.Background(), os.Interrupt)
	defer stop()
	res, err := analysis.Group(ctx, in, opt)
	if err != nil {
		return err
	}
	if err := res.WriteDir(*out); err != nil {
		return err
	}
	if res.IsShard() {
		lo, hi, n := res.ShardRange()
		fmt.Fprintf(stdout, "shard %d/%d: relabellings %d to %d of %d; join the shards with: winnow merge --out DIR SHARD_DIR...\n", opt.Shard, opt.Shards, lo, hi-1, n)
		fmt.Fprintf(stdout, "wrote %s\n", *out)
		return nil
	}
	printGroupSummary(stdout, stderr, res, *out)
	return nil
}

// runMerge is the merge command: it joins the shard folders of one sharded group run.
func runMerge(args []string, stdout, stderr io.Writer) error {
	fs := newFlags("merge", stderr)
	out := fs.String("out", "", "output folder (required)")
	if err := parse(fs, args); err != nil {
		return err
	}
	if *out == "" {
		return usageError{"merge: --out DIR is required"}
	}
	if fs.NArg() == 0 {
		return usageError{"merge: want the shard folders: merge --out DIR SHARD_DIR..."}
	}
	res, err := analysis.MergeGroup(fs.Args())
	if err != nil {
		return err
	}
	if err := res.WriteDir(*out); err != nil {
		return err
	}
	printGroupSummary(stdout, stderr, res, *out)
	return nil
}

func parseShard(s string) (k, n int, err error) {
	a, b, ok := strings.Cut(s, "/")
	if ok {
		k, err = strconv.Atoi(strings.TrimSpace(a))
		if err == nil {
			n, err = strconv.Atoi(strings.TrimSpace(b))
		}
	}
	if !ok || err != nil || n < 1 || k < 1 || k > n {
		return 0, 0, fmt.Errorf("%q; want K/N with 1 <= K <= N, e.g. 2/8", s)
	}
	return k, n, nil
}

func groupMethods() []string {
	var names []string
	for _, m := range infer.Methods() {
		names = append(names, m.String())
	}
	return names
}

func printGroupSummary(stdout, stderr io.Writer, res *analysis.GroupResult, dir string) {
	s := res.Summary
	for _, w := range s.Warnings {
		fmt.Fprintf(stderr, "winnow: warning: %s\n", w)
	}
	perms := "no permutations"
	if s.Perms != nil {
		perms = fmt.Sprintf("%d relabellings", *s.Perms)
	}
	fmt.Fprintf(stdout, "group of %d maps, %d voxels, df %g, %s\n", s.Dims[3], s.MaskVoxels, s.DF, perms)
	for _, c := range s.Contrasts {
		thr := "none can pass"
		if c.StatThreshold != nil {
			thr = fmt.Sprintf("threshold %.4g", *c.StatThreshold)
		}
		fmt.Fprintf(stdout, "%s [%s, alpha %g, %s]: %d voxels in %d clusters\n", c.Name, c.Correction, c.Alpha, thr, c.SurvivingVoxels, len(c.Clusters))
	}
	if nc := s.NullCheck; nc != nil {
		fmt.Fprintf(stdout, "permutation null: %d of %d relabellings exceed the threshold (FWE %.3g, 95%% CI %.3g to %.3g)\n", nc.WithFindings, nc.Designs, nc.FWEEstimate, nc.CI95[0], nc.CI95[1])
	}
	fmt.Fprintf(stdout, "wrote %s\n", filepath.Join(dir, "summary.json"))
}
