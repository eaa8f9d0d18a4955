package pipit

import (
	"path/filepath"

	"github.com/pipit-audio/pipit/quant"
)

func OpenExport(dir string) (*quant.Model, error) {
	return quant.ImportFiles(filepath.Join(dir, BlobFile), filepath.Join(dir, SchemeFile))
}

func RecoverExport(dir string) ([]string, error) { return nil, nil }
