package main

import (
	"encoding/json"
	"fmt"
	"os"
	"path/filepath"

	"convtag/stream"
)

// shardStats is what tag --shard K/N -o FILE writes to FILE.stats.json
// once FILE is complete: which part of which input it is and what the run
// counted. A joining step checks that every part's file is there.
type shardStats struct {
	Input   string           `json:"input"`
	Part    int              `json:"part"`
	Parts   int              `json:"parts"`
	Records int64            `json:"records"`
	Written int64            `json:"written"`
	Tags    map[string]int64 `json:"tags"`
	Rejects int64            `json:"rejected"`
	Seconds float64          `json:"seconds"`
}

// writeShardStats writes the part's stats beside its output, through a
// temporary file renamed into place.
func writeShardStats(path, input string, s stream.Shard, st stream.Stats) error {
	b, err := json.MarshalIndent(shardStats{Input: filepath.Base(input), Part: s.K, Parts: s.N, Records: st.Records,
		Written: st.Written, Tags: st.Tags, Rejects: st.Rejected, Seconds: st.Elapsed.Seconds()}, "", "  ")
	if err != nil {
		return err
	}
	tmp := fmt.Sprintf("%s.tmp%d", path, os.Getpid())
	if err := os.WriteFile(tmp, append(b, '\n'), 0o666); err != nil {
		os.Remove(tmp)
		return fmt.Errorf("--shard stats: %w", err)
	}
	if err := os.Rename(tmp, path); err != nil {
		os.Remove(tmp)
		return fmt.Errorf("--shard stats: %w", err)
	}
	return nil
}
