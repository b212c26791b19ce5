package main

import (
	"bufio"
	"bytes"
	"encoding/json"
	"fmt"
	"net"
	"os"
	"os/exec"
	"path/filepath"
	"slices"
	"strconv"
	"strings"
	"syscall"
	"testing"
	"time"

	"github.com/klauspost/compress/zstd"
)

// The README's cluster commands, as printed there (TestSlurm checks they
// are). The test runs them with /shared/ moved to a temporary directory,
// "sbatch --wait" for "sbatch" (it must know when the array has ended),
// 4 parts for 8 and the part it cancelled for "3,7".
var clusterCommands = struct {
	dailySetup, dailySubmit, dailyRerun, partsSetup, partsSubmit, join, missing, partsRerun string
}{
	dailySetup:  "mkdir -p /shared/chat/logs /shared/chat/tagged/daily\nls /shared/chat/daily/*.jsonl.zst > /shared/chat/daily.list",
	dailySubmit: "sbatch --array=1-$(wc -l < /shared/chat/daily.list) by-file.sbatch",
	dailyRerun:  `sbatch --array=$(grep -n . /shared/chat/daily.list | while IFS=: read -r i f; do test -e "/shared/chat/tagged/daily/${f##*/}" || echo $i; done | paste -sd, -) by-file.sbatch`,
	partsSetup:  "mkdir -p /shared/chat/logs /shared/chat/tagged/parts",
	partsSubmit: "sbatch --array=1-8 by-part.sbatch",
	join:        "convtag join -o /shared/chat/tagged/archive-2026.jsonl /shared/chat/tagged/parts/part-*.jsonl",
	missing:     "convtag join --missing /shared/chat/tagged/parts/part-*.jsonl",
	partsRerun:  "sbatch --array=3,7 --export=ALL,PARTS=8 by-part.sbatch",
}

// slurmCluster is a private one-node Slurm: munged with a key of its own,
// slurmctld and slurmd (node convtag0) with a slurm.conf in dir, their own
// state, spool, log and pid files there, and ports picked free on the
// loopback interface. No system configuration is read or touched: every
// client finds the cluster through SLURM_CONF in env.
type slurmCluster struct {
	dir   string
	env   []string
	procs []daemon // munged first
}

// daemon is a started daemon; done is closed when it has ended.
type daemon struct {
	cmd  *exec.Cmd
	done chan struct{}
}

// slurmTool finds a Slurm or munge program (daemons live in /usr/sbin,
// often not on PATH). Under CI=true a missing one fails the test.
func slurmTool(t *testing.T, name, pkg string) string {
	t.Helper()
	if p, err := exec.LookPath(name); err == nil {
		return p
	}
	if p := filepath.Join("/usr/sbin", name); exec.Command(p, "-V").Run() == nil {
		return p
	}
	if os.Getenv("CI") == "true" {
		t.Fatalf("%s is needed (Debian's %s)", name, pkg)
	}
	t.Skipf("%s not installed (Debian's %s)", name, pkg)
	return ""
}

// freePort returns a TCP port free on 127.0.0.1 a moment ago.
func freePort(t *testing.T) int {
	l, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		t.Fatal(err)
	}
	defer l.Close()
	return l.Addr().(*net.TCPAddr).Port
}

const slurmConf = `ClusterName=convtagtest
SlurmctldHost=localhost(127.0.0.1)
SlurmctldPort={{CTLD_PORT}}
SlurmdPort={{D_PORT}}
SlurmUser=root
SlurmdUser=root
AuthType=auth/munge
CredType=cred/munge
AuthInfo=socket={{DIR}}/munge/munge.sock
StateSaveLocation={{DIR}}/state
SlurmdSpoolDir={{DIR}}/spool
SlurmctldPidFile={{DIR}}/slurmctld.pid
SlurmdPidFile={{DIR}}/slurmd.pid
SlurmctldLogFile={{DIR}}/log/slurmctld.log
SlurmdLogFile={{DIR}}/log/slurmd.log
MailProg=/bin/true
ProctrackType=proctrack/linuxproc
TaskPlugin=task/none
SelectType=select/cons_tres
SelectTypeParameters=CR_CPU
SchedulerType=sched/builtin
JobAcctGatherType=jobacct_gather/none
AccountingStorageType=accounting_storage/none
JobCompType=jobcomp/none
MpiDefault=none
ReturnToService=2
SlurmdParameters=config_overrides
KillWait=2
MinJobAge=30
NodeName=convtag0 NodeHostname=localhost NodeAddr=127.0.0.1 CPUs=4 State=UNKNOWN
PartitionName=test Nodes=convtag0 Default=YES MaxTime=INFINITE State=UP
`

// startSlurm starts the cluster and waits for its node to be idle; the
// test's cleanup shuts it down. The node says it has 4 CPUs
// (config_overrides), so two tasks of 2 CPUs run at once even on 2 cores.
func startSlurm(t *testing.T, path string) *slurmCluster {
	t.Helper()
	bins := map[string]string{}
	for name, pkg := range map[string]string{"mungekey": "munge", "munged": "munge", "slurmctld": "slurmctld",
		"slurmd": "slurmd", "sbatch": "slurm-client", "scontrol": "slurm-client", "scancel": "slurm-client", "sinfo": "slurm-client"} {
		bins[name] = slurmTool(t, name, pkg)
	}
	if os.Geteuid() != 0 {
		if os.Getenv("CI") == "true" {
			t.Fatal("slurmd runs each job as its user: the Slurm test needs root (CI runs as root)")
		}
		t.Skip("slurmd runs each job as its user: the Slurm test needs root")
	}
	// Short: the munge socket's path must fit in a sockaddr_un.
	dir, err := os.MkdirTemp("", "ctslurm")
	if err != nil {
		t.Fatal(err)
	}
	c := &slurmCluster{dir: dir}
	t.Cleanup(func() { c.stop(t); os.RemoveAll(dir) })
	for _, d := range []string{"munge", "state", "spool", "log"} {
		if err := os.MkdirAll(filepath.Join(dir, d), 0o700); err != nil {
			t.Fatal(err)
		}
	}
	conf := strings.NewReplacer("{{DIR}}", dir, "{{CTLD_PORT}}", strconv.Itoa(freePort(t)), "{{D_PORT}}", strconv.Itoa(freePort(t))).Replace(slurmConf)
	if err := os.WriteFile(filepath.Join(dir, "slurm.conf"), []byte(conf), 0o644); err != nil {
		t.Fatal(err)
	}
	c.env = append(os.Environ(), "SLURM_CONF="+filepath.Join(dir, "slurm.conf"), "PATH="+path)
	key, sock := filepath.Join(dir, "munge", "munge.key"), filepath.Join(dir, "munge", "munge.sock")
	if out, err := exec.Command(bins["mungekey"], "-c", "-k", key).CombinedOutput(); err != nil {
		t.Fatalf("mungekey: %v %s", err, out)
	}
	c.start(t, bins["munged"], "-F", "-f", "--key-file="+key, "--socket="+sock, "--pid-file="+filepath.Join(dir, "munge", "munged.pid"),
		"--log-file="+filepath.Join(dir, "log", "munged.log"), "--seed-file="+filepath.Join(dir, "munge", "seed"))
	c.waitFor(t, "munged's socket", func() bool { _, err := os.Stat(sock); return err == nil })
	c.start(t, bins["slurmctld"], "-D", "-f", filepath.Join(dir, "slurm.conf"))
	c.start(t, bins["slurmd"], "-D", "-N", "convtag0", "-f", filepath.Join(dir, "slurm.conf"))
	c.waitFor(t, "node convtag0 idle", func() bool {
		out, _ := c.cmd(bins["sinfo"], "-h", "-N", "-o", "%T").Output()
		return strings.TrimSpace(string(out)) == "idle"
	})
	return c
}

func (c *slurmCluster) cmd(name string, args ...string) *exec.Cmd {
	cmd := exec.Command(name, args...)
	cmd.Env = c.env
	return cmd
}

// start runs a daemon in the foreground, in a process group of its own.
func (c *slurmCluster) start(t *testing.T, name string, args ...string) {
	t.Helper()
	cmd := c.cmd(name, args...)
	cmd.SysProcAttr = &syscall.SysProcAttr{Setpgid: true}
	out, err := os.Create(filepath.Join(c.dir, "log", filepath.Base(name)+".out"))
	if err != nil {
		t.Fatal(err)
	}
	defer out.Close() // the child has its own copy
	cmd.Stdout, cmd.Stderr = out, out
	if err := cmd.Start(); err != nil {
		t.Fatalf("%s: %v", name, err)
	}
	d := daemon{cmd, make(chan struct{})}
	go func() { cmd.Wait(); close(d.done) }()
	c.procs = append(c.procs, d)
}

// waitFor polls ok until it holds; it fails the test, with the daemons'
// logs, when a daemon has ended or after a deadlock guard of two minutes.
func (c *slurmCluster) waitFor(t *testing.T, what string, ok func() bool) {
	t.Helper()
	for guard := time.Now().Add(2 * time.Minute); !ok(); time.Sleep(100 * time.Millisecond) {
		for _, p := range c.procs {
			select {
			case <-p.done:
				c.logs(t)
				t.Fatalf("waiting for %s: %s ended", what, p.cmd.Path)
			default:
			}
		}
		if time.Now().After(guard) {
			c.logs(t)
			t.Fatalf("no %s after 2 minutes", what)
		}
	}
}

func (c *slurmCluster) logs(t *testing.T) {
	for _, f := range []string{"munged.log", "munged.out", "slurmctld.log", "slurmctld.out", "slurmd.log", "slurmd.out"} {
		b, _ := os.ReadFile(filepath.Join(c.dir, "log", f))
		if len(b) > 4000 {
			b = b[len(b)-4000:]
		}
		t.Logf("%s:\n%s", f, b)
	}
}

// stop asks Slurm to shut down, then ends munged, and kills, by process
// group, any daemon of the test's that has not ended after a while.
func (c *slurmCluster) stop(t *testing.T) {
	if len(c.procs) > 1 {
		c.cmd("scontrol", "shutdown").Run()
	}
	end := func(p daemon) {
		select {
		case <-p.done:
		case <-time.After(30 * time.Second):
			t.Logf("%s did not end: killed", p.cmd.Path)
			syscall.Kill(-p.cmd.Process.Pid, syscall.SIGKILL)
			<-p.done
		}
	}
	for i := len(c.procs) - 1; i >= 1; i-- {
		end(c.procs[i])
	}
	if len(c.procs) > 0 {
		c.procs[0].cmd.Process.Signal(syscall.SIGTERM) // munged
		end(c.procs[0])
	}
}

// sh runs a shell line as a user would, in dir, with the cluster's
// environment and extra variables.
func (c *slurmCluster) sh(t *testing.T, dir, line string, extra ...string) (string, error) {
	t.Helper()
	cmd := c.cmd("bash", "-euo", "pipefail", "-c", line)
	cmd.Dir = dir
	cmd.Env = append(slices.Clone(c.env), extra...)
	var out, errb bytes.Buffer
	cmd.Stdout, cmd.Stderr = &out, &errb
	err := cmd.Run()
	if err != nil {
		err = fmt.Errorf("%s: %v: %s", line, err, errb.String())
	}
	return out.String(), err
}

// TestSlurm runs the README's cluster section on a real, private Slurm
// (Debian's slurm-wlm daemons and munge, installed by .ci/run): an array
// of 4 tasks over 4 compressed daily files, each output compared with one
// local process over the same file, and the README's re-run line after a
// lost output; then the huge-file script as 4 parts, joined with the
// README's join line and compared byte for byte with one local process
// over the whole file; then the same array with task 3 cancelled
// (scancel of one array index) while running: no part 3 is left, join
// refuses and --missing says 3, and the README's re-run line completes
// the set. The README prints the committed scripts and these commands.
func TestSlurm(t *testing.T) {
	if testing.Short() {
		t.Skip("-short: the Slurm test starts daemons and runs jobs")
	}
	readme, err := os.ReadFile("../../README.md")
	if err != nil {
		t.Fatal(err)
	}
	scripts := map[string]string{}
	for _, name := range []string{"by-file.sbatch", "by-part.sbatch"} {
		b, err := os.ReadFile(filepath.Join("../../testdata/slurm", name))
		if err != nil {
			t.Fatal(err)
		}
		scripts[name] = string(b)
		var ind strings.Builder
		for _, l := range strings.SplitAfter(string(b), "\n") {
			if strings.TrimSpace(l) != "" {
				ind.WriteString("    ")
			}
			ind.WriteString(l)
		}
		if !strings.Contains(string(readme), ind.String()) {
			t.Errorf("the README does not print testdata/slurm/%s as it is", name)
		}
	}
	for _, l := range []string{clusterCommands.dailySetup, clusterCommands.dailySubmit, clusterCommands.dailyRerun, clusterCommands.partsSetup,
		clusterCommands.partsSubmit, clusterCommands.join, clusterCommands.missing, clusterCommands.partsRerun} {
		if !strings.Contains(string(readme), "    "+strings.ReplaceAll(l, "\n", "\n    ")+"\n") {
			t.Errorf("the README does not print %q", l)
		}
	}

	bin := binary(t)
	binDir := filepath.Dir(bin)
	c := startSlurm(t, binDir+":"+os.Getenv("PATH"))
	shared := filepath.Join(c.dir, "shared")
	jobs := filepath.Join(c.dir, "jobs")
	for _, d := range []string{"models", "chat/daily", "jobs"} {
		os.MkdirAll(filepath.Join(shared, d), 0o755)
	}
	os.MkdirAll(jobs, 0o755)
	swap := strings.NewReplacer("/shared/", shared+"/")
	for name, s := range scripts {
		os.WriteFile(filepath.Join(jobs, name), []byte(swap.Replace(s)), 0o644)
	}
	m, _ := os.ReadFile("testdata/eval/demo-small.safetensors")
	model := filepath.Join(shared, "models", "ferry.safetensors")
	os.WriteFile(model, m, 0o644)
	local := func(args ...string) []byte {
		t.Helper()
		out, err := exec.Command(bin, append([]string{"tag", "-m", model, "-j", "2"}, args...)...).Output()
		if err != nil {
			t.Fatalf("local run %v: %v", args, err)
		}
		return out
	}
	run := func(line string, extra ...string) string {
		t.Helper()
		line = strings.NewReplacer("sbatch ", "sbatch --wait ", "--array=1-8", "--array=1-4", "PARTS=8", "PARTS=4").Replace(swap.Replace(line))
		out, err := c.sh(t, jobs, line, extra...)
		if err != nil {
			c.logs(t)
			t.Fatal(err)
		}
		return out
	}

	// A directory of daily files, one task each.
	enc, _ := zstd.NewWriter(nil)
	var days []string
	for d := 1; d <= 4; d++ {
		day := filepath.Join(shared, "chat", "daily", fmt.Sprintf("2026-03-%02d.jsonl.zst", d))
		os.WriteFile(day, enc.EncodeAll([]byte(chat(3000*d)), nil), 0o644)
		days = append(days, day)
	}
	run(clusterCommands.dailySetup)
	run(clusterCommands.dailySubmit)
	checkDays := func() {
		t.Helper()
		for _, day := range days {
			got, err := os.ReadFile(filepath.Join(shared, "chat", "tagged", "daily", filepath.Base(day)))
			if err != nil {
				t.Fatalf("daily task's output: %v", err)
			}
			dec, _ := zstd.NewReader(bytes.NewReader(got))
			var plain bytes.Buffer
			if _, err := plain.ReadFrom(dec); err != nil {
				t.Fatalf("%s: %v", day, err)
			}
			if !bytes.Equal(plain.Bytes(), local(day)) {
				t.Errorf("%s: the array task's output differs from a local run", filepath.Base(day))
			}
		}
	}
	checkDays()
	os.Remove(filepath.Join(shared, "chat", "tagged", "daily", filepath.Base(days[2]))) // task 3's output lost
	run(clusterCommands.dailyRerun)
	checkDays()

	// One huge file in 4 parts: CRLF lines, blank lines, a long record
	// and no final newline.
	var archive bytes.Buffer
	archive.WriteString(chat(30000))
	archive.WriteString("{\"text\":\"" + strings.Repeat("ferry fog ", 100000) + "\"}\r\n\n")
	archive.WriteString(strings.ReplaceAll(chat(20000), "\n", "\r\n"))
	archive.WriteString("harbour at noon")
	input := filepath.Join(shared, "chat", "archive-2026.jsonl")
	os.WriteFile(input, archive.Bytes(), 0o644)
	whole := local(input)
	joined := filepath.Join(shared, "chat", "tagged", "archive-2026.jsonl")
	parts := filepath.Join(shared, "chat", "tagged", "parts")
	run(clusterCommands.partsSetup)
	run(clusterCommands.partsSubmit)
	run(clusterCommands.join)
	if got, _ := os.ReadFile(joined); !bytes.Equal(got, whole) {
		t.Errorf("4 array tasks joined differ from one local process (%d vs %d bytes)", len(got), len(whole))
	}

	// The same array again, task 3 cancelled while it runs: a wrapper
	// holds it before convtag starts and says so.
	os.RemoveAll(parts)
	os.Remove(joined)
	run(clusterCommands.partsSetup)
	wrapDir := filepath.Join(c.dir, "wrap")
	os.MkdirAll(wrapDir, 0o755)
	held := filepath.Join(c.dir, "held")
	os.WriteFile(filepath.Join(wrapDir, "convtag"), []byte(`#!/bin/sh
if [ "$SLURM_ARRAY_TASK_ID" = 3 ]; then
	echo "${SLURM_ARRAY_JOB_ID}_3" > "$CONVTAG_TEST_HELD.tmp" && mv "$CONVTAG_TEST_HELD.tmp" "$CONVTAG_TEST_HELD"
	exec sleep 600
fi
exec `+bin+` "$@"
`), 0o755)
	line := strings.NewReplacer("sbatch ", "sbatch --wait ", "--array=1-8", "--array=1-4").Replace(swap.Replace(clusterCommands.partsSubmit))
	sub := c.cmd("bash", "-c", line)
	sub.Dir = jobs
	sub.Env = append(slices.Clone(c.env), "PATH="+wrapDir+":"+binDir+":"+os.Getenv("PATH"), "CONVTAG_TEST_HELD="+held)
	var subOut bytes.Buffer
	sub.Stdout, sub.Stderr = &subOut, &subOut
	if err := sub.Start(); err != nil {
		t.Fatal(err)
	}
	c.waitFor(t, "array task 3 running", func() bool { _, err := os.Stat(held); return err == nil })
	task, _ := os.ReadFile(held)
	if out, err := c.cmd("scancel", strings.TrimSpace(string(task))).CombinedOutput(); err != nil {
		t.Fatalf("scancel %s: %v %s", task, err, out)
	}
	if err := sub.Wait(); err == nil {
		t.Errorf("sbatch --wait of an array with a cancelled task exited 0: %s", subOut.String())
	}
	for k := 1; k <= 4; k++ {
		_, err1 := os.Stat(filepath.Join(parts, fmt.Sprintf("part-%d.jsonl", k)))
		_, err2 := os.Stat(filepath.Join(parts, fmt.Sprintf("part-%d.jsonl%s", k, shardStatsSuffix)))
		if (k == 3) != (err1 != nil) || (k == 3) != (err2 != nil) {
			t.Errorf("after cancelling task 3: part %d: %v, stats: %v", k, err1, err2)
		}
	}
	if out := run(clusterCommands.missing); out != "3\n" {
		t.Errorf("join --missing after cancelling task 3: %q", out)
	}
	if out, err := c.sh(t, jobs, swap.Replace(clusterCommands.join)); err == nil || !strings.Contains(err.Error(), "1 of 4 parts of archive-2026.jsonl missing or incomplete: 3") {
		t.Errorf("join without part 3: %v %s", err, out)
	}
	if _, err := os.Stat(joined); err == nil {
		t.Error("join without part 3 wrote its output")
	}
	run(strings.Replace(clusterCommands.partsRerun, "--array=3,7", "--array=3", 1))
	run(clusterCommands.join)
	if got, _ := os.ReadFile(joined); !bytes.Equal(got, whole) {
		t.Errorf("after the re-run of task 3, the joined parts differ from one local process (%d vs %d bytes)", len(got), len(whole))
	}
	var st shardStats
	if b, err := os.ReadFile(filepath.Join(parts, "part-3.jsonl"+shardStatsSuffix)); err != nil || json.Unmarshal(b, &st) != nil || st.Part != 3 || st.Parts != 4 {
		t.Errorf("re-run part 3's stats: %+v, %v", st, err)
	}
	logs, _ := filepath.Glob(filepath.Join(shared, "chat", "logs", "*.log"))
	for _, l := range logs {
		if b, _ := os.ReadFile(l); bytes.Contains(b, []byte("convtag:")) {
			t.Errorf("%s: %s", filepath.Base(l), firstLine(b))
		}
	}
}

func firstLine(b []byte) string {
	s := bufio.NewScanner(bytes.NewReader(b))
	s.Scan()
	return s.Text()
}

// TestSlurmRates (CONVTAG_SLURM_RATES=1) measures the records/s of the
// huge-file script as 1, 2 and 4 array tasks on the private cluster,
// beside one local process over the same file in the same run (the
// baseline), from the parts' stats files: records over the span from the
// first task's start to the last one's end, and CPU seconds summed. It
// asserts nothing about speed (on one machine the tasks share its cores:
// the figure shows the overhead of parts, TestSlurm shows correctness).
func TestSlurmRates(t *testing.T) {
	if os.Getenv("CONVTAG_SLURM_RATES") != "1" {
		t.Skip("set CONVTAG_SLURM_RATES=1 to measure")
	}
	bin := binary(t)
	c := startSlurm(t, filepath.Dir(bin)+":"+os.Getenv("PATH"))
	shared := filepath.Join(c.dir, "shared")
	jobs := filepath.Join(c.dir, "jobs")
	for _, d := range []string{"models", "chat/logs", "chat/tagged/parts"} {
		os.MkdirAll(filepath.Join(shared, d), 0o755)
	}
	os.MkdirAll(jobs, 0o755)
	s, _ := os.ReadFile("../../testdata/slurm/by-part.sbatch")
	swap := strings.NewReplacer("/shared/", shared+"/")
	os.WriteFile(filepath.Join(jobs, "by-part.sbatch"), []byte(swap.Replace(string(s))), 0o644)
	m, _ := os.ReadFile("testdata/eval/demo-small.safetensors")
	model := filepath.Join(shared, "models", "ferry.safetensors")
	os.WriteFile(model, m, 0o644)
	records := 2_000_000
	if v, err := strconv.Atoi(os.Getenv("CONVTAG_SLURM_RECORDS")); err == nil {
		records = v
	}
	input := filepath.Join(shared, "chat", "archive-2026.jsonl")
	os.WriteFile(input, []byte(chat(records)), 0o644)
	parts := filepath.Join(shared, "chat", "tagged", "parts")
	// rate reads the stats files of n parts.
	rate := func(dir string, n int) (perSec, cpu float64) {
		var first, last time.Time
		var recs int64
		for k := 1; k <= n; k++ {
			b, err := os.ReadFile(filepath.Join(dir, fmt.Sprintf("part-%d.jsonl%s", k, shardStatsSuffix)))
			var st shardStats
			if err != nil || json.Unmarshal(b, &st) != nil {
				t.Fatalf("part %d/%d: %v", k, n, err)
			}
			end := st.Started.Add(time.Duration(st.Seconds * float64(time.Second)))
			if first.IsZero() || st.Started.Before(first) {
				first = st.Started
			}
			if end.After(last) {
				last = end
			}
			recs += st.Records
			cpu += st.CPUSeconds
		}
		if recs != int64(records) {
			t.Fatalf("%d parts counted %d records of %d", n, recs, records)
		}
		return float64(recs) / last.Sub(first).Seconds(), cpu
	}
	for rep := 1; rep <= 2; rep++ {
		base := filepath.Join(c.dir, "base")
		os.MkdirAll(base, 0o755)
		if out, err := exec.Command(bin, "tag", "-m", model, "-j", "2", "--shard", "1/1", "-o", filepath.Join(base, "part-1.jsonl"), input).CombinedOutput(); err != nil {
			t.Fatalf("baseline: %v %s", err, out)
		}
		baseRate, baseCPU := rate(base, 1)
		t.Logf("run %d: one local process, -j 2: %.0f records/s, %.2f CPU s", rep, baseRate, baseCPU)
		for _, n := range []int{1, 2, 4} {
			os.RemoveAll(parts)
			os.MkdirAll(parts, 0o755)
			cpus := max(1, 2/n)
			line := fmt.Sprintf("sbatch --wait --array=1-%d --cpus-per-task=%d by-part.sbatch", n, cpus)
			if _, err := c.sh(t, jobs, line); err != nil {
				c.logs(t)
				t.Fatal(err)
			}
			r, cpu := rate(parts, n)
			t.Logf("run %d: %d array tasks, -j %d each: %.0f records/s (%.2f of the local process), %.2f CPU s", rep, n, cpus, r, r/baseRate, cpu)
		}
	}
}
