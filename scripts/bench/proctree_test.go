//go:build linux

package main

import (
	"os"
	"testing"
)

// The process tree of this test holds this process; its memory and CPU are
// positive (proc(5)).
func TestProcTree(t *testing.T) {
	tree, ok := procTree(os.Getpid())
	if !ok || tree[int64(os.Getpid())] == nil {
		t.Fatalf("procTree(self) = %v, %v; want this process in it", len(tree), ok)
	}
	if rss, hwm, ok := treeMem(os.Getpid()); !ok || rss <= 0 || hwm < rss {
		t.Errorf("treeMem(self) = %d, %d, %v", rss, hwm, ok)
	}
	if _, ok := treeCPU(os.Getpid()); !ok {
		t.Error("treeCPU(self) not available")
	}
	if _, ok := procTree(-1); ok {
		t.Error("procTree(-1) ok")
	}
}
