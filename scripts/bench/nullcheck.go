package main

import (
	"context"
	"encoding/json"
	"fmt"
	"os"
	"os/exec"
	"path/filepath"
)

const nullCheckName = "null_check_cost"

// nullCheck measures what the null check adds to a fit: `winnow fit` on the
// large synthetic run with and without `--null-check 40`, runs interleaved,
// as (with − without) ÷ without on the session's clock. The chance designs
// are summed in the same pass as the real fit, so the file is read once.
func (s *session) nullCheck(ctx context.Context) error {
	s.buildCLI()
	if s.cliErr != nil {
		return fmt.Errorf("building the winnow CLI: %v", s.cliErr)
	}
	const k = 40
	var ratio, wall []float64
	var found string
	var lastBase, lastNull sample
	for i := 0; i < s.cfg.Runs; i++ {
		var t [2]sample
		for j, extra := range [][]string{nil, {"--null-check", fmt.Sprint(k)}} {
			out := filepath.Join(s.cfg.Dir, fmt.Sprintf("null-%d-%d", i, j))
			c := exec.Command(s.cli, append(s.fitArgs(out), extra...)...)
			tctx, cancel := context.WithTimeout(ctx, s.cfg.Timeout)
			smp, _, err := runCmd(tctx, c)
			cancel()
			if err != nil {
				return err
			}
			t[j] = smp
			if j == 1 && i == 0 {
				found = nullSentence(out)
			}
			os.RemoveAll(out)
		}
		lastBase, lastNull = t[0], t[1]
		b, n := t[0].secs(s.cfg.Clock), t[1].secs(s.cfg.Clock)
		ratio = append(ratio, (n-b)/b)
		wall = append(wall, (t[1].Wall.Seconds()-t[0].Wall.Seconds())/t[0].Wall.Seconds())
		s.save()
	}
	wm, _, _, _ := stats(wall)
	s.setFigure(nullCheckName, ratio, s.cfg.Clock, fmt.Sprintf(
		"(`winnow fit --null-check %d` − `winnow fit`) ÷ `winnow fit` on the large synthetic run (native CLI, same flags otherwise, runs interleaved): the extra cost of the chance designs, summed in the same pass; last run %.2f s vs %.2f s (%s), wall %.2f s vs %.2f s; wall-clock ratio %.2f; result: %s",
		k, lastNull.secs(s.cfg.Clock), lastBase.secs(s.cfg.Clock), s.cfg.Clock, lastNull.Wall.Seconds(), lastBase.Wall.Seconds(), wm, found))
	return nil
}

// nullSentence is the null check's count from a fit's summary.json.
func nullSentence(dir string) string {
	b, err := os.ReadFile(filepath.Join(dir, "summary.json"))
	if err != nil {
		return "summary.json not readable"
	}
	var sum struct {
		Null *struct {
			Designs  int        `json:"designs"`
			Findings int        `json:"with_findings"`
			CI       [2]float64 `json:"ci95"`
		} `json:"null_check"`
	}
	if json.Unmarshal(b, &sum) != nil || sum.Null == nil {
		return "no null_check in summary.json"
	}
	return fmt.Sprintf("%d of %d chance designs with a finding (95 %% interval %.1f-%.1f %%)", sum.Null.Findings, sum.Null.Designs, 100*sum.Null.CI[0], 100*sum.Null.CI[1])
}
