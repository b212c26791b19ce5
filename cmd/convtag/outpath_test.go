package main

import (
	"context"
	"encoding/json"
	"io/fs"
	"os"
	"os/exec"
	"path/filepath"
	"runtime"
	"slices"
	"strings"
	"syscall"
	"testing"
	"time"

	"convtag/model"
)

// dirNames lists dir's entries.
func dirNames(t *testing.T, dir string) []string {
	t.Helper()
	ents, err := os.ReadDir(dir)
	if err != nil {
		t.Fatal(err)
	}
	var names []string
	for _, e := range ents {
		names = append(names, e.Name())
	}
	return names
}

func copyFile(t *testing.T, from, to string) {
	t.Helper()
	b, err := os.ReadFile(from)
	if err != nil {
		t.Fatal(err)
	}
	if err := os.WriteFile(to, b, 0o644); err != nil {
		t.Fatal(err)
	}
}

// An -o that cannot be written, or that would replace an input, is refused
// before any record is read (no "training on" line, no epoch), and every
// file in the directory is left as it was.
func TestTrainOutputCheckedFirst(t *testing.T) {
	dir := t.TempDir()
	train, dev := filepath.Join(dir, "train.jsonl"), filepath.Join(dir, "dev.jsonl")
	copyFile(t, "../../testdata/demo/train.jsonl", train)
	copyFile(t, "../../testdata/demo/dev.jsonl", dev)
	devLink := filepath.Join(dir, "dev-link.jsonl")
	if err := os.Symlink(dev, devLink); err != nil {
		t.Fatal(err)
	}
	vec := filepath.Join(dir, "v.txt")
	if err := os.WriteFile(vec, []byte("1 16\nferry 1 2 3 4 5 6 7 8 9 10 11 12 13 14 15 16\n"), 0o644); err != nil {
		t.Fatal(err)
	}
	sub := filepath.Join(dir, "sub")
	if err := os.Mkdir(sub, 0o755); err != nil {
		t.Fatal(err)
	}
	readOnly := filepath.Join(dir, "ro")
	if err := os.Mkdir(readOnly, 0o555); err != nil {
		t.Fatal(err)
	}
	// Root writes into a 0555 directory; sysfs takes no new file even
	// from root (Linux, sysfs(5)), so as root the case uses /sys.
	noCreate := readOnly
	if os.Geteuid() == 0 && runtime.GOOS == "linux" {
		noCreate = "/sys"
	}
	quiet := []string{"--vector-size", "16", "--filters", "8", "--unseen-rows", "50", "--epochs", "2"}
	for _, tc := range []struct {
		name  string
		out   string
		extra []string
		code  int
		msg   string
		root  bool // the case holds when running as root
	}{
		{"missing directory", filepath.Join(dir, "no", "such", "m.safetensors"), nil, exitFailure, "no such file or directory", true},
		{"under a regular file", filepath.Join(train, "m.safetensors"), nil, exitFailure, "not a directory", true},
		{"a directory", sub, nil, exitUsage, "is a directory", true},
		{"the training file", train, nil, exitUsage, "is the input file", true},
		{"the dev file by a link", devLink, nil, exitUsage, "is the input file", true},
		{"the vectors file", vec, []string{"--vectors", vec}, exitUsage, "is the input file", true},
		{"read-only directory", filepath.Join(noCreate, "m.safetensors"), nil, exitFailure, "cannot create a file", runtime.GOOS == "linux"},
	} {
		t.Run(tc.name, func(t *testing.T) {
			if !tc.root && os.Geteuid() == 0 {
				t.Skip("root writes into a read-only directory; the missing-directory case covers the check")
			}
			before := dirNames(t, dir)
			want, _ := os.ReadFile(train)
			args := append([]string{"train", "-o", tc.out}, quiet...)
			args = append(append(args, tc.extra...), train, "--dev", dev)
			code, _, stderr := runCmd(t, "", args...)
			if code != tc.code || !strings.Contains(stderr, tc.msg) || !strings.HasPrefix(stderr, "convtag: train: -o ") {
				t.Errorf("exit %d, stderr %q; want exit %d, one line about -o mentioning %q", code, stderr, tc.code, tc.msg)
			}
			if strings.Contains(stderr, "training on") || strings.Contains(stderr, "epoch") {
				t.Errorf("trained before refusing the output: %q", stderr)
			}
			if got := dirNames(t, dir); !slices.Equal(got, before) {
				t.Errorf("directory holds %q, had %q", got, before)
			}
			if got, _ := os.ReadFile(train); string(got) != string(want) {
				t.Error("the training file was changed")
			}
			if names := dirNames(t, readOnly); len(names) > 0 {
				t.Errorf("read-only directory holds %q", names)
			}
		})
	}
}

// The same checks for embed's -o.
func TestEmbedOutputCheckedFirst(t *testing.T) {
	dir := t.TempDir()
	text, _ := embedCorpus(300)
	in := filepath.Join(dir, "chat.txt")
	if err := os.WriteFile(in, []byte(text), 0o644); err != nil {
		t.Fatal(err)
	}
	link := filepath.Join(dir, "chat-link.txt")
	if err := os.Symlink(in, link); err != nil {
		t.Fatal(err)
	}
	for _, tc := range []struct {
		name string
		out  string
		code int
		msg  string
	}{
		{"missing directory", filepath.Join(dir, "no", "such", "v.txt"), exitFailure, "no such file or directory"},
		{"under a regular file", filepath.Join(in, "v.txt"), exitFailure, "not a directory"},
		{"a directory", dir, exitUsage, "is a directory"},
		{"the input", in, exitUsage, "is the input file"},
		{"the input by a link", link, exitUsage, "is the input file"},
	} {
		t.Run(tc.name, func(t *testing.T) {
			before := dirNames(t, dir)
			code, _, stderr := runCmd(t, "", "embed", "-o", tc.out, "--vector-size", "8", "--passes", "1", in)
			if code != tc.code || !strings.Contains(stderr, tc.msg) || !strings.HasPrefix(stderr, "convtag: embed: -o ") {
				t.Errorf("exit %d, stderr %q; want exit %d, one line about -o mentioning %q", code, stderr, tc.code, tc.msg)
			}
			if strings.Contains(stderr, "counting · ") {
				t.Errorf("read the input before refusing the output: %q", stderr)
			}
			if got := dirNames(t, dir); !slices.Equal(got, before) {
				t.Errorf("directory holds %q, had %q", got, before)
			}
			if got, _ := os.ReadFile(in); string(got) != text {
				t.Error("the input was changed")
			}
		})
	}
}

// The model records the base names of its training and dev files, never
// where they lived.
func TestTrainStoresBaseNames(t *testing.T) {
	dir := t.TempDir()
	train, err := filepath.Abs("../../testdata/demo/train.jsonl")
	if err != nil {
		t.Fatal(err)
	}
	dev, _ := filepath.Abs("../../testdata/demo/dev.jsonl")
	out := filepath.Join(dir, "m.safetensors")
	args := append(append([]string{"train", "-o", out}, small...), train, "--dev", dev)
	if code, _, stderr := runCmd(t, "", args...); code != exitOK {
		t.Fatalf("exit %d: %s", code, stderr)
	}
	m, err := model.Open(out)
	if err != nil {
		t.Fatal(err)
	}
	defer m.Close()
	meta := m.Meta[model.MetaTraining]
	var sum trainSummary
	if err := json.Unmarshal([]byte(meta), &sum); err != nil {
		t.Fatal(err)
	}
	if !slices.Equal(sum.Files, []string{"train.jsonl"}) || !slices.Equal(sum.DevFiles, []string{"dev.jsonl"}) {
		t.Errorf("files %q, dev files %q; want the base names", sum.Files, sum.DevFiles)
	}
	if strings.Contains(meta, filepath.Dir(train)) {
		t.Errorf("the training metadata holds the data's directory %s", filepath.Dir(train))
	}
}

// embed's vectors file gets 0666 less the umask, as other outputs do.
func TestEmbedModeFollowsUmask(t *testing.T) {
	dir := t.TempDir()
	text, _ := embedCorpus(200)
	in := filepath.Join(dir, "chat.txt")
	if err := os.WriteFile(in, []byte(text), 0o644); err != nil {
		t.Fatal(err)
	}
	for _, tc := range []struct {
		umask int
		want  fs.FileMode
	}{
		{0o022, 0o644},
		{0o077, 0o600},
	} {
		out := filepath.Join(dir, "v.txt")
		old := syscall.Umask(tc.umask)
		code, _, stderr := runCmd(t, "", "embed", "-o", out, "--vector-size", "8", "--passes", "1", "-j", "1", "-q", in)
		syscall.Umask(old)
		if code != exitOK {
			t.Fatalf("exit %d: %s", code, stderr)
		}
		st, err := os.Stat(out)
		if err != nil {
			t.Fatal(err)
		}
		if got := st.Mode().Perm(); got != tc.want {
			t.Errorf("umask %03o: mode %03o, want %03o", tc.umask, got, tc.want)
		}
		os.Remove(out)
	}
}

// waitFor polls cond until it holds; the limit only stops a hung test.
func waitFor(t *testing.T, what string, cond func() bool) {
	t.Helper()
	for limit := time.Now().Add(60 * time.Second); !cond(); time.Sleep(10 * time.Millisecond) {
		if time.Now().After(limit) {
			t.Fatalf("no %s after 60 s", what)
		}
	}
}

// A signal stops train and embed with exit 1 and one line "convtag:
// interrupted": no output file, no temporary file, nothing spooled left.
func TestInterruptTrainEmbed(t *testing.T) {
	bin := binary(t)
	text, _ := embedCorpus(2000)
	for _, tc := range []struct {
		name  string
		args  func(dir string) []string
		stdin bool   // the input is an open pipe that never ends
		ready string // stderr holds this once the long part runs
	}{
		{"train", func(dir string) []string {
			return []string{"train", "-o", filepath.Join(dir, "m.safetensors"), "--vector-size", "16", "--filters", "8",
				"--epochs", "100000", "--patience", "0", "-j", "1", "../../testdata/demo/train.jsonl"}
		}, false, "epoch 1/"},
		{"embed", func(dir string) []string {
			in := filepath.Join(dir, "chat.txt")
			if err := os.WriteFile(in, []byte(text), 0o644); err != nil {
				t.Fatal(err)
			}
			return []string{"embed", "-o", filepath.Join(dir, "v.txt"), "--vector-size", "8", "--passes", "10000", "-j", "1", in}
		}, false, "counting · "},
		{"embed reading standard input", func(dir string) []string {
			return []string{"embed", "-o", filepath.Join(dir, "v.txt"), "--vector-size", "8"}
		}, true, ""},
	} {
		for _, sig := range []syscall.Signal{syscall.SIGINT, syscall.SIGTERM} {
			t.Run(tc.name+"/"+sig.String(), func(t *testing.T) {
				dir, tmp := t.TempDir(), t.TempDir()
				cmd := exec.Command(bin, tc.args(dir)...)
				cmd.Env = append(os.Environ(), "TMPDIR="+tmp)
				stderr := &syncBuffer{}
				cmd.Stderr = stderr
				in, err := cmd.StdinPipe()
				if err != nil {
					t.Fatal(err)
				}
				defer in.Close()
				if err := cmd.Start(); err != nil {
					t.Fatal(err)
				}
				t.Cleanup(func() { cmd.Process.Kill(); cmd.Wait() })
				if tc.stdin {
					if _, err := in.Write([]byte(text)); err != nil {
						t.Fatal(err)
					}
					// The spool file appears once the signals are caught.
					waitFor(t, "spool file", func() bool { return len(dirNames(t, tmp)) > 0 })
				} else {
					waitFor(t, tc.ready, func() bool { return strings.Contains(stderr.String(), tc.ready) })
				}
				cmd.Process.Signal(sig)
				cmd.Wait()
				if code := cmd.ProcessState.ExitCode(); code != exitFailure {
					t.Errorf("exit %d (%v), want %d", code, cmd.ProcessState, exitFailure)
				}
				if !strings.HasSuffix(stderr.String(), "\nconvtag: interrupted\n") && stderr.String() != "convtag: interrupted\n" {
					t.Errorf("stderr does not end with the line \"convtag: interrupted\": %q", stderr.String())
				}
				if names := dirNames(t, dir); len(names) > 1 || len(names) == 1 && names[0] != "chat.txt" {
					t.Errorf("output directory holds %q", names)
				}
				if names := dirNames(t, tmp); len(names) > 0 {
					t.Errorf("temporary directory holds %q", names)
				}
			})
		}
	}
}

// A signal after training, just before the model is written, writes
// nothing: no model, no temporary file, exit 1.
func TestTrainInterruptBeforeSave(t *testing.T) {
	dir := t.TempDir()
	out := filepath.Join(dir, "m.safetensors")
	defer func(f func(context.Context)) { beforeSave = f }(beforeSave)
	beforeSave = func(ctx context.Context) {
		syscall.Kill(os.Getpid(), syscall.SIGTERM)
		select {
		case <-ctx.Done():
		case <-time.After(60 * time.Second): // only stops a hung test
		}
	}
	code, _, stderr := runCmd(t, "", trainArgs(out)...)
	if code != exitFailure || !strings.HasSuffix(stderr, "\nconvtag: interrupted\n") || strings.Contains(stderr, "wrote") {
		t.Errorf("exit %d, stderr %q; want exit %d and \"convtag: interrupted\"", code, stderr, exitFailure)
	}
	if names := dirNames(t, dir); len(names) > 0 {
		t.Errorf("directory holds %q", names)
	}
}

// A signal sent once training is over, as the model is written (a large
// embedding makes the save the long part): either the run gives up before
// saving (exit 1, no file) or the save finishes (exit 0, a whole model);
// never a temporary file, never a death by the signal.
func TestTrainSignalDuringSave(t *testing.T) {
	if testing.Short() {
		t.Skip("writes a 50 MB model")
	}
	bin := binary(t)
	for _, sig := range []syscall.Signal{syscall.SIGINT, syscall.SIGTERM} {
		t.Run(sig.String(), func(t *testing.T) {
			dir := t.TempDir()
			out := filepath.Join(dir, "m.safetensors")
			cmd := exec.Command(bin, "train", "-o", out, "--vector-size", "32", "--filters", "8", "--unseen-rows", "400000",
				"--epochs", "1", "--no-fold", "-j", "1", "../../testdata/demo/train.jsonl")
			stderr := &syncBuffer{}
			cmd.Stderr = stderr
			if err := cmd.Start(); err != nil {
				t.Fatal(err)
			}
			t.Cleanup(func() { cmd.Process.Kill(); cmd.Wait() })
			// Said after training, just before the model is written.
			waitFor(t, "baseline line", func() bool { return strings.Contains(stderr.String(), "convtag: baseline:") })
			cmd.Process.Signal(sig)
			cmd.Wait()
			code := cmd.ProcessState.ExitCode()
			t.Logf("exit %d", code)
			switch code {
			case exitFailure:
				if !strings.HasSuffix(stderr.String(), "\nconvtag: interrupted\n") {
					t.Errorf("exit 1 without \"interrupted\": %q", stderr.String())
				}
				if names := dirNames(t, dir); len(names) > 0 {
					t.Errorf("an interrupted run left %q", names)
				}
			case exitOK:
				m, err := model.Open(out)
				if err != nil {
					t.Fatal(err)
				}
				defer m.Close()
				if err := m.Verify(); err != nil {
					t.Errorf("the finished save: %v", err)
				}
				if names := dirNames(t, dir); len(names) != 1 {
					t.Errorf("directory holds %q, want only the model", names)
				}
			default:
				t.Errorf("exit %d (%v), want 1 or 0; stderr %q", code, cmd.ProcessState, stderr.String())
			}
			for _, name := range dirNames(t, dir) {
				if strings.HasPrefix(name, ".") {
					t.Errorf("temporary file %s left", name)
				}
			}
		})
	}
}
