package main

import (
	"errors"
	"fmt"
	"os"
	"runtime"
	"runtime/debug"

	"convtag/model"
	"convtag/stream"
)

// reloadOnHangup reopens the model file on each SIGHUP and hands it to the
// running pipeline; a file that fails any check of model.Open or
// model.Verify is reported and the current model kept. Either way the
// output file is reopened. The Switch releases (unmaps) a replaced model
// once the last block tagged with it is written.
func reloadOnHangup(a *app, path string, why int, sw *stream.Switch, hup <-chan os.Signal, done <-chan struct{}) {
	name := path
	if name == "" {
		name = "the built-in model"
	}
	for {
		select {
		case <-done:
			return
		case <-hup:
		}
		m, err := openChecked(a, path)
		if err != nil {
			fmt.Fprintf(a.stderr, "convtag: reload %s: %v; keeping the current model\n", name, err)
			sw.Set(nil)
			continue
		}
		sw.Set(newTagger(m, why))
		fmt.Fprintf(a.stderr, "convtag: reloaded %s\n", name)
	}
}

// errChangedWhileRead is a fault while checking a model being reloaded:
// its file was truncated or rewritten while it was read.
var errChangedWhileRead = errors.New("the file changed while it was being read (replace a model file by rename, mv)")

// openChecked opens the model at path and runs every check Verify has, so
// that a reload never switches to a file the running filter cannot use. A
// memory fault while reading the mapped file is an error, not a crash.
func openChecked(a *app, path string) (m *model.Model, err error) {
	defer debug.SetPanicOnFault(debug.SetPanicOnFault(true))
	defer func() {
		r := recover()
		if r == nil {
			return
		}
		if re, ok := r.(runtime.Error); ok {
			if _, ok := re.(interface{ Addr() uintptr }); ok {
				if m != nil {
					m.Close()
				}
				m, err = nil, errChangedWhileRead
				return
			}
		}
		panic(r)
	}()
	if m, err = a.loadModel(path); err != nil {
		return nil, err
	}
	if err = m.Verify(); err != nil {
		m.Close()
		return nil, err
	}
	return m, nil
}
