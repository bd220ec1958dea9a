package main

import (
	"github.com/urfave/cli/v2"

	"tessera/restore"
)

// The flags that several commands share, defined once so that their names,
// defaults and wording cannot drift apart.

// codingFlags are the numeric options of the sparse coding, with the
// defaults d; rounds and bound word what those two mean for the command.
func codingFlags(d restore.Options, rounds, bound, seed string) []cli.Flag {
	return []cli.Flag{
		&cli.IntFlag{Name: "patch", Value: d.Patch, Usage: "patch side `N` in pixels, 2..32"},
		&cli.IntFlag{Name: "atoms", Value: d.Atoms, Usage: "`N` dictionary atoms, 1..4096"},
		&cli.IntFlag{Name: "rounds", Value: d.Rounds, Usage: "`N` K-SVD training rounds" + rounds + ", 0..1000 (0 codes with the starting DCT dictionary)"},
		&cli.Float64Flag{Name: "bound", Value: d.Bound, Usage: "factor `C` of the coding error bound n·(C·σ)²" + bound},
		&cli.IntFlag{Name: "train", Value: d.Train, Usage: "`N` training patches drawn from each image, at least --atoms"},
		&cli.Uint64Flag{Name: "seed", Value: d.Seed, Usage: "`N` seeds " + seed},
	}
}

const pathSeed = "the random choices; each image's seed derives from it and the image's path"

// batchFlags are the options of the batch runner (batch.go); what names
// the images the --max-pixels guard reads.
func batchFlags(what string) []cli.Flag {
	return []cli.Flag{
		&cli.IntFlag{Name: "jobs", Value: 1, Usage: "process `N` images at once; each gets NumCPU/N threads"},
		&cli.StringFlag{Name: "report", Usage: "write one JSON line per input to `FILE` (- for standard output); replaced on each run"},
		&cli.BoolFlag{Name: "force", DisableDefaultText: true, Usage: "redo outputs that already exist (without it a rerun skips them)"},
		&cli.StringFlag{Name: "shard", Usage: "process share `K/N` of the sorted image list (1 <= K <= N), or auto: take it from a job array"},
		&cli.StringFlag{Name: "shard-count", Usage: "`N` shares for --shard auto (needed with a Kubernetes Indexed Job)"},
		&cli.BoolFlag{Name: "quiet", DisableDefaultText: true, Usage: "print failures only: no progress bar, no summary line"},
		&cli.StringFlag{Name: "format", Usage: "write `png|tiff|pgm` (pgm: P5 .pgm for gray, P6 .ppm for colour); default: the input's format"},
		&cli.StringFlag{Name: "max-pixels", Value: "1e9", DefaultText: "1e9", Usage: "refuse " + what + " of more than `N` pixels, read from the header before decoding (0: no limit)"},
	}
}

var outFlag = &cli.StringFlag{Name: "out", Usage: "write to `DIR|FILE|-`: a folder (input folders are mirrored under it), one output file, or - for standard output"}

func flagList(parts ...[]cli.Flag) []cli.Flag {
	var out []cli.Flag
	for _, p := range parts {
		out = append(out, p...)
	}
	return out
}
