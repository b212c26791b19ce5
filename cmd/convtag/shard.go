package main

import (
	"encoding/json"
	"fmt"
	"os"
	"path/filepath"
	"syscall"
	"time"

	"convtag/stream"
)

// shardStats is what tag --shard K/N -o FILE writes to FILE.stats.json
// once FILE is complete: which part of which input it is, what the run
// counted and how big FILE is. join reads it to check that every part is
// there, from one run over one input, and unchanged since its task ended.
type shardStats struct {
	Input      string           `json:"input"`       // the input's base name
	InputBytes int64            `json:"input_bytes"` // its size when the task started
	Part       int              `json:"part"`
	Parts      int              `json:"parts"`
	Bytes      int64            `json:"bytes"` // size of FILE
	Records    int64            `json:"records"`
	Written    int64            `json:"written"`
	Tags       map[string]int64 `json:"tags"`
	Rejects    int64            `json:"rejected"`
	Started    time.Time        `json:"started"`
	Seconds    float64          `json:"seconds"`
	CPUSeconds float64          `json:"cpu_seconds"` // user + system time of the process
}

// shardStatsSuffix is appended to a part's file name for its stats file.
const shardStatsSuffix = ".stats.json"

// cpuSeconds is the user and system CPU time this process has used.
func cpuSeconds() float64 {
	var ru syscall.Rusage
	if syscall.Getrusage(syscall.RUSAGE_SELF, &ru) != nil {
		return 0
	}
	return time.Duration(ru.Utime.Nano() + ru.Stime.Nano()).Seconds()
}

// writeShardStats writes the stats of the part at path (complete and
// renamed into place) beside it, through a temporary file renamed into
// place.
func writeShardStats(path, input string, inputBytes int64, started time.Time, s stream.Shard, st stream.Stats) error {
	fi, err := os.Stat(path)
	if err != nil {
		return fmt.Errorf("--shard stats: %w", err)
	}
	b, err := json.MarshalIndent(shardStats{Input: filepath.Base(input), InputBytes: inputBytes, Part: s.K, Parts: s.N,
		Bytes: fi.Size(), Records: st.Records, Written: st.Written, Tags: st.Tags, Rejects: st.Rejected,
		Started: started.UTC(), Seconds: st.Elapsed.Seconds(), CPUSeconds: cpuSeconds()}, "", "  ")
	if err != nil {
		return err
	}
	stats := path + shardStatsSuffix
	tmp := fmt.Sprintf("%s.tmp%d", stats, os.Getpid())
	if err := os.WriteFile(tmp, append(b, '\n'), 0o666); err != nil {
		os.Remove(tmp)
		return fmt.Errorf("--shard stats: %w", err)
	}
	if err := os.Rename(tmp, stats); err != nil {
		os.Remove(tmp)
		return fmt.Errorf("--shard stats: %w", err)
	}
	return nil
}
