package stream

import (
	"bytes"
	"context"
	"fmt"
	"io"
	"os"
	"os/exec"
	"strconv"
	"strings"
	"testing"
)

// genReader yields n invented JSON records without holding them.
type genReader struct {
	n, i int
	buf  []byte
	off  int
}

func (g *genReader) Read(p []byte) (int, error) {
	if g.off == len(g.buf) {
		if g.i == g.n {
			return 0, io.EOF
		}
		g.buf, g.off = g.buf[:0], 0
		for k := 0; k < 1000 && g.i < g.n; k++ {
			g.buf = fmt.Appendf(g.buf, `{"id":%d,"user":"u%d","text":"the %d ferry waits in fog at the harbour"}`+"\n", g.i, g.i%97, g.i%13)
			g.i++
		}
	}
	n := copy(p, g.buf[g.off:])
	g.off += n
	return n, nil
}

// vmKB reads a field (VmHWM, VmRSS) of /proc/self/status in kB.
func vmKB(field string) int64 {
	b, err := os.ReadFile("/proc/self/status")
	if err != nil {
		return -1
	}
	for _, l := range strings.Split(string(b), "\n") {
		if rest, ok := strings.CutPrefix(l, field+":"); ok {
			v, _ := strconv.ParseInt(strings.TrimSpace(strings.TrimSuffix(strings.TrimSpace(rest), "kB")), 10, 64)
			return v
		}
	}
	return -1
}

const memChildEnv = "CONVTAG_STREAM_MEMORY_CHILD"

// Memory stays flat on an endless stream: 5 million records through, the
// peak resident set grows by less than 50 MB. Measured in a fresh process
// (this test binary run again), since the peak (VmHWM) never goes down.
// About 5-10 s on 2 cores.
func TestMemoryFlat(t *testing.T) {
	if os.Getenv(memChildEnv) == "1" {
		before := vmKB("VmRSS")
		st, err := Run(context.Background(), Options{Tagger: newKeywordTagger()}, nil, &genReader{n: 5_000_000}, io.Discard)
		fmt.Printf("records %d err %v growth_kb %d\n", st.Records, err, vmKB("VmHWM")-before)
		return
	}
	if testing.Short() || raceEnabled {
		t.Skip("5 million records: not with -short or -race")
	}
	if _, err := os.Stat("/proc/self/status"); err != nil {
		t.Skip("needs /proc/self/status")
	}
	cmd := exec.Command(os.Args[0], "-test.run=^TestMemoryFlat$", "-test.v")
	cmd.Env = append(os.Environ(), memChildEnv+"=1")
	out, err := cmd.CombinedOutput()
	if err != nil {
		t.Fatalf("%v\n%s", err, out)
	}
	var records, growth int64
	var runErr string
	i := bytes.Index(out, []byte("records "))
	if i < 0 {
		t.Fatalf("child said: %s", out)
	}
	fmt.Sscanf(string(out[i:]), "records %d err %s growth_kb %d", &records, &runErr, &growth)
	if records != 5_000_000 || runErr != "<nil>" {
		t.Fatalf("child: %s", out[i:])
	}
	t.Logf("peak RSS growth over 5M records: %.1f MB", float64(growth)/1024)
	if growth > 50*1024 {
		t.Errorf("peak RSS grew by %d kB, want under 50 MB", growth)
	}
}
