// Command tessera restores images with sparse representations over
// dictionaries learned from the images themselves.
package main

import (
	"errors"
	"fmt"
	"io"
	"os"
	"strings"

	"github.com/urfave/cli/v2"
	"golang.org/x/term"
)

const caution = `Restored images are estimates, not measurements. Keep the originals, and do not
use restored frames for diagnosis, forensics or quantitative measurement
without validating them against your own local practice.`

// env is what a run sees of the process: its streams and environment.
type env struct {
	stdin   io.Reader
	stdout  io.Writer
	stderr  io.Writer
	tty     bool       // stderr is a terminal: draw the progress bar
	width   func() int // terminal columns
	getenv  func(string) string
	signals bool // stop cleanly on SIGINT and SIGTERM
}

func newApp(e *env) *cli.App {
	return &cli.App{
		Name:  "tessera",
		Usage: "patch-based image restoration with learned sparse dictionaries",
		Description: "tessera cuts images into overlapping patches, learns a dictionary from the\n" +
			"degraded image with K-SVD, codes every patch with orthogonal matching pursuit\n" +
			"to an error bound tied to the noise level, and averages the patches back.\n\n" + caution,
		HideHelpCommand: true,
		Writer:          e.stdout,
		ErrWriter:       e.stderr,
		OnUsageError: func(_ *cli.Context, err error, _ bool) error {
			return usagef("%s; see tessera --help", flagErrText(err))
		},
		Action: func(cc *cli.Context) error {
			if cc.NArg() > 0 {
				return usagef("unknown command %q; see tessera --help", cc.Args().First())
			}
			return cli.ShowAppHelp(cc)
		},
		ExitErrHandler: func(*cli.Context, error) {}, // run picks the exit status
		Commands:       []*cli.Command{denoiseCommand(e), inpaintCommand(e), scoreCommand(e), benchCommand(e), learnCommand(e), atomsCommand(e), noiseCommand(e)},
	}
}

// run executes the command line and returns the exit status.
func run(args []string, e *env) int {
	app := newApp(e)
	var err error
	if len(args) > 2 {
		for _, c := range app.Commands {
			if args[1] == c.Name {
				var rest []string
				if rest, err = intersperse(args[2:], valueFlags(c)); err == nil {
					args = append(args[:2:2], rest...)
				} else if ue, ok := err.(*usageError); ok {
					ue.msg = strings.Replace(ue.msg, "tessera denoise", "tessera "+c.Name, 1)
				}
			}
		}
	}
	if err == nil {
		err = app.Run(args)
	}
	var ue *usageError
	var es *exitStatus
	switch {
	case err == nil:
		return 0
	case errors.As(err, &es):
		return es.code
	case errors.As(err, &ue):
		fmt.Fprintln(e.stderr, "tessera: "+ue.msg)
		return 2
	}
	fmt.Fprintln(e.stderr, "tessera:", err)
	return 2
}

// valueFlags names the options of c that take a value.
func valueFlags(c *cli.Command) map[string]bool {
	m := map[string]bool{}
	for _, f := range c.Flags {
		if df, ok := f.(cli.DocGenerationFlag); ok && df.TakesValue() {
			for _, n := range f.Names() {
				m[n] = true
			}
		}
	}
	return m
}

// intersperse moves options written after the paths in front of them, so
// that "tessera denoise photos --out clean" works as it reads. Everything
// after "--" stays a path.
func intersperse(args []string, valueFlags map[string]bool) ([]string, error) {
	var flags, paths []string
	for i := 0; i < len(args); i++ {
		a := args[i]
		if a == "--" {
			paths = append(paths, args[i+1:]...)
			break
		}
		if len(a) < 2 || a[0] != '-' {
			paths = append(paths, a)
			continue
		}
		flags = append(flags, a)
		name := strings.TrimLeft(a, "-")
		if strings.Contains(name, "=") || !valueFlags[name] {
			continue
		}
		if i+1 == len(args) {
			return nil, usagef("option --%s needs a value; see tessera denoise --help", name)
		}
		flags = append(flags, args[i+1])
		i++
	}
	if len(paths) == 0 {
		return flags, nil
	}
	return append(append(flags, "--"), paths...), nil
}

func main() {
	fd := int(os.Stderr.Fd())
	e := &env{
		stdin: os.Stdin, stdout: os.Stdout, stderr: os.Stderr,
		tty: term.IsTerminal(fd),
		width: func() int {
			w, _, err := term.GetSize(fd)
			if err != nil {
				return 0
			}
			return w
		},
		getenv:  os.Getenv,
		signals: true,
	}
	os.Exit(run(os.Args, e))
}
