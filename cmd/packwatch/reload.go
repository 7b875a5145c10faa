package main

import (
	"context"
	"log/slog"
	"os"
	"path/filepath"
	"sync"
	"time"

	"github.com/fsnotify/fsnotify"

	"packwatch/config"
	"packwatch/decode"
)

// reloader watches the profile files of a session and swaps a changed
// profile into the engine. Editors save by rename, so it watches the
// directories, debounces, and compares hashes. An invalid new profile leaves
// the old one running and shows its FILE:LINE:COL error on the page.
type reloader struct {
	s        *session
	log      *slog.Logger
	debounce time.Duration
	wg       sync.WaitGroup
	// reloaded, if set, is called after each reload attempt (tests).
	reloaded func(id string, err error)
	// watching is closed once the watches are in place.
	watching chan struct{}
}

func newReloader(s *session, log *slog.Logger) *reloader {
	return &reloader{s: s, log: log, debounce: 300 * time.Millisecond, watching: make(chan struct{})}
}

// run watches until ctx ends; wait returns when it has.
func (r *reloader) run(ctx context.Context) {
	r.wg.Add(1)
	defer r.wg.Done()
	w, err := fsnotify.NewWatcher()
	if err != nil {
		r.log.Warn("profile reload off", "err", err)
		close(r.watching)
		return
	}
	defer w.Close()
	byPath := map[string]*packEntry{}
	for _, p := range r.s.packs {
		abs, err := filepath.Abs(p.prof.File)
		if err != nil {
			continue
		}
		if _, err := os.Stat(abs); err != nil {
			continue // built-in profile
		}
		byPath[abs] = p
		if err := w.Add(filepath.Dir(abs)); err != nil {
			r.log.Warn("profile reload off", "file", abs, "err", err)
		}
	}
	close(r.watching)
	pending := map[string]bool{}
	timer := time.NewTimer(time.Hour)
	timer.Stop()
	for {
		select {
		case <-ctx.Done():
			timer.Stop()
			return
		case ev, ok := <-w.Events:
			if !ok {
				return
			}
			abs, _ := filepath.Abs(ev.Name)
			if _, ok := byPath[abs]; ok && ev.Op&(fsnotify.Write|fsnotify.Create|fsnotify.Rename) != 0 {
				pending[abs] = true
				timer.Reset(r.debounce)
			}
		case err, ok := <-w.Errors:
			if !ok {
				return
			}
			r.log.Warn("profile watch", "err", err)
		case <-timer.C:
			for path := range pending {
				r.reload(byPath[path], path)
			}
			clear(pending)
		}
	}
}

func (r *reloader) wait() { r.wg.Wait() }

func (r *reloader) reload(p *packEntry, path string) {
	data, err := os.ReadFile(path)
	if err != nil {
		return // mid-rename: the Create event will follow
	}
	np, err := config.Parse(p.prof.File, data)
	if err == nil && np.Hash == p.prof.Hash {
		return
	}
	var m *decode.Map
	if err == nil {
		m, err = decode.Compile(np)
	}
	if err == nil {
		err = r.s.eng.Swap(p.id, m)
	}
	if err != nil {
		r.s.eng.SetProfileError(p.id, err.Error())
		r.log.Warn("profile not reloaded; still running on the previous one", "file", path, "err", err)
	} else {
		r.s.mu.Lock()
		p.prof, p.m = np, m
		r.s.mu.Unlock()
		r.log.Info("profile reloaded", "file", path, "hash", np.Hash[:12])
		if r.s.rec != nil {
			r.s.rec.Profile(r.s.eng.DataTime(), np.Pack.Name, np.Text, np.Hash)
		}
	}
	if r.reloaded != nil {
		r.reloaded(p.id, err)
	}
}
