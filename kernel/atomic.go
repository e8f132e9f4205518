package kernel

import (
	"fmt"
	"os"
	"path/filepath"
)

// WriteFileAtomic writes data to path so that path holds either its earlier
// content or all of data, never a part: StageFile, then Commit. On any
// failure path is left as it was and no temporary file remains.
func WriteFileAtomic(path string, data []byte, perm os.FileMode) error {
	s, err := StageFile(path, data, perm)
	if err != nil {
		return err
	}
	return s.Commit()
}

// StagedFile is data written and synced to a temporary file beside its
// target, not yet in place. Staging every output first and committing them
// together keeps a failure or an interrupt from replacing some outputs and
// not others.
type StagedFile struct {
	Path   string // the target
	tmp    string
	direct []byte // for a target that is not a regular file: written on Commit
}

// StageFile writes data to a temporary file in path's folder and syncs it to
// disk. The folder must exist; a path that is a folder is refused. A link is
// followed (the file it points to is replaced, the link kept). A target that
// exists but is not a regular file (a device such as /dev/null or
// /dev/stdout, a named pipe) is not replaced: Commit writes data to it. On
// failure nothing is left behind.
func StageFile(path string, data []byte, perm os.FileMode) (_ *StagedFile, err error) {
	if fi, err := os.Stat(path); err == nil {
		switch {
		case fi.IsDir():
			return nil, fmt.Errorf("%s is a folder, not a file", path)
		case !fi.Mode().IsRegular():
			return &StagedFile{Path: path, direct: data}, nil
		}
		if real, err := filepath.EvalSymlinks(path); err == nil {
			path = real
		}
	}
	f, err := os.CreateTemp(filepath.Dir(path), "."+filepath.Base(path)+".*.tmp")
	if err != nil {
		return nil, err
	}
	defer func() {
		if err != nil {
			f.Close()
			os.Remove(f.Name())
		}
	}()
	if _, err = f.Write(data); err != nil {
		return nil, err
	}
	if err = f.Chmod(perm); err != nil {
		return nil, err
	}
	if err = f.Sync(); err != nil {
		return nil, err
	}
	if err = f.Close(); err != nil {
		return nil, err
	}
	return &StagedFile{Path: path, tmp: f.Name()}, nil
}

// Commit renames the staged file over its target and syncs the folder (best
// effort: not every file system syncs folders). On failure the temporary
// file is removed and the target left as it was.
func (s *StagedFile) Commit() error {
	if s.direct != nil {
		f, err := os.OpenFile(s.Path, os.O_WRONLY, 0)
		if err != nil {
			return err
		}
		if _, err := f.Write(s.direct); err != nil {
			f.Close()
			return err
		}
		return f.Close()
	}
	if err := os.Rename(s.tmp, s.Path); err != nil {
		os.Remove(s.tmp)
		return err
	}
	if d, err := os.Open(filepath.Dir(s.Path)); err == nil {
		d.Sync()
		d.Close()
	}
	return nil
}

// Discard removes the staged file; the target is left as it was.
func (s *StagedFile) Discard() {
	if s != nil && s.tmp != "" {
		os.Remove(s.tmp)
	}
}

// SamePath reports whether a and b name the same file: the same cleaned
// absolute path, or (when both exist) the same file by os.SameFile, which
// also sees through links and hard links.
func SamePath(a, b string) bool {
	if a == "" || b == "" {
		return false
	}
	aa, err1 := filepath.Abs(a)
	bb, err2 := filepath.Abs(b)
	if err1 == nil && err2 == nil && aa == bb {
		return true
	}
	fa, err1 := os.Stat(a)
	fb, err2 := os.Stat(b)
	return err1 == nil && err2 == nil && os.SameFile(fa, fb)
}
