// Package cref holds pipit's portable C99 reference runtime for exported
// networks (c/pipit_rt.h, c/pipit_rt.c: the executable specification of the
// export) and helpers that compile it with the system C compiler beside a
// generated model header and run it, so tests and `pipit demo` can check
// that C computes the same bits as the Go engine.
package cref

import (
	"bytes"
	_ "embed"
	"encoding/binary"
	"fmt"
	"os"
	"os/exec"
	"path/filepath"
)

// RuntimeHeader and RuntimeSource are the C reference runtime.
var (
	//go:embed c/pipit_rt.h
	RuntimeHeader []byte
	//go:embed c/pipit_rt.c
	RuntimeSource []byte
	// FastRuntimeHeader and FastRuntimeSource are the faster kernels
	// (DSP-extension dot products on Cortex-M4) that compute the same bits.
	//go:embed c/pipit_rt_fast.h
	FastRuntimeHeader []byte
	//go:embed c/pipit_rt_fast.c
	FastRuntimeSource []byte
)

// driver reads int8 samples from argv[1], runs the model layer by layer in
// a pool of exactly PREFIX_POOL_BYTES bytes from malloc (so AddressSanitizer
// sees any access outside the plan), and writes every layer's output to
// argv[2]: per sample, per layer, out_shape bytes.
const driver = `#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include "model.h"

int main(int argc, char **argv) {
  const pipit_model_t *m = &%[1]s_model;
  size_t in_size = (size_t)%[2]s_INPUT_H * %[2]s_INPUT_W * %[2]s_INPUT_C;
  int8_t *pool, *sample;
  FILE *fi, *fo;
  int i, r;
  if (argc != 3) return 2;
  if ((r = pipit_check(m)) != PIPIT_OK) {
    fprintf(stderr, "pipit_check: %%d\n", r);
    return 2;
  }
  pool = (int8_t *)malloc(%[2]s_POOL_BYTES);
  sample = (int8_t *)malloc(in_size);
  fi = fopen(argv[1], "rb");
  fo = fopen(argv[2], "wb");
  if (!pool || !sample || !fi || !fo) return 3;
  while (fread(sample, 1, in_size, fi) == in_size) {
    memcpy(pipit_input(m, pool), sample, in_size);
    for (i = 0; i < m->num_layers; i++) {
      const pipit_layer_t *l = &m->layers[i];
      size_t n = (size_t)l->out_shape[0] * l->out_shape[1] * l->out_shape[2];
      if (pipit_run_layer(m, i, pool) != PIPIT_OK) return 4;
      fwrite(pool + l->out_offset, 1, n, fo);
    }
  }
  fclose(fi);
  fclose(fo);
  free(pool);
  free(sample);
  return 0;
}
`

// Build writes the runtime, header (the output of quant.CHeader with the
// given prefix) and a driver into dir and compiles them with cc (e.g.
// "gcc") as C99 with all warnings as errors; with sanitize it adds
// AddressSanitizer and UndefinedBehaviorSanitizer. It returns the
// executable's path.
func Build(dir, header, prefix, cc string, sanitize bool) (string, error) {
	dir, err := filepath.Abs(dir) // the compiler runs in dir
	if err != nil {
		return "", fmt.Errorf("cref: %w", err)
	}
	files := map[string][]byte{"pipit_rt.h": RuntimeHeader, "pipit_rt.c": RuntimeSource, "model.h": []byte(header),
		"driver.c": []byte(fmt.Sprintf(driver, prefix, upper(prefix)))}
	for name, data := range files {
		if err := os.WriteFile(filepath.Join(dir, name), data, 0o644); err != nil {
			return "", fmt.Errorf("cref: %w", err)
		}
	}
	exe := filepath.Join(dir, "pipit_ref")
	args := []string{"-std=c99", "-O1", "-Wall", "-Wextra", "-Werror", "-pedantic", "-o", exe, "driver.c", "pipit_rt.c"}
	if sanitize {
		args = append([]string{"-fsanitize=address,undefined", "-fno-sanitize-recover=all", "-g"}, args...)
	}
	cmd := exec.Command(cc, args...)
	cmd.Dir = dir
	if out, err := cmd.CombinedOutput(); err != nil {
		return "", fmt.Errorf("cref: %s %v: %v\n%s", cc, args, err, out)
	}
	return exe, nil
}

func upper(s string) string {
	b := []byte(s)
	for i, c := range b {
		if c >= 'a' && c <= 'z' {
			b[i] = c - 32
		}
	}
	return string(b)
}

// Run feeds samples (each of the input size) to the built executable and
// returns, per sample, every layer's int8 output given layer sizes.
func Run(exe string, samples [][]int8, layerSizes []int) ([][][]int8, error) {
	dir := filepath.Dir(exe)
	in, out := filepath.Join(dir, "input.bin"), filepath.Join(dir, "output.bin")
	var buf bytes.Buffer
	for _, s := range samples {
		binary.Write(&buf, binary.LittleEndian, s)
	}
	if err := os.WriteFile(in, buf.Bytes(), 0o644); err != nil {
		return nil, fmt.Errorf("cref: %w", err)
	}
	cmd := exec.Command(exe, in, out)
	if msg, err := cmd.CombinedOutput(); err != nil {
		return nil, fmt.Errorf("cref: running %s: %v\n%s", exe, err, msg)
	}
	raw, err := os.ReadFile(out)
	if err != nil {
		return nil, fmt.Errorf("cref: %w", err)
	}
	per := 0
	for _, n := range layerSizes {
		per += n
	}
	if len(raw) != per*len(samples) {
		return nil, fmt.Errorf("cref: C runtime wrote %d bytes, want %d", len(raw), per*len(samples))
	}
	res := make([][][]int8, len(samples))
	pos := 0
	for s := range samples {
		for _, n := range layerSizes {
			layer := make([]int8, n)
			for i := range layer {
				layer[i] = int8(raw[pos+i])
			}
			res[s] = append(res[s], layer)
			pos += n
		}
	}
	return res, nil
}
