// compose-check loads a Compose file with compose-go, the loader Docker Compose itself
// uses: the Compose Specification schema, interpolation, merging of YAML anchors and
// extension fields, and its semantic checks (e.g. depends_on naming a service that
// exists). It prints the normalized project as JSON on stdout, or the problem on stderr
// and exits 1. Run by scripts/deploy-check.mjs; no Docker engine needed.
package main

import (
	"context"
	"fmt"
	"os"

	"github.com/compose-spec/compose-go/v2/cli"
)

func main() {
	if len(os.Args) != 2 {
		fmt.Fprintln(os.Stderr, "usage: compose-check FILE")
		os.Exit(2)
	}
	// No OS environment: the check must not depend on the machine it runs on.
	opts, err := cli.NewProjectOptions([]string{os.Args[1]}, cli.WithName("pairflow"))
	if err == nil {
		var out []byte
		project, loadErr := opts.LoadProject(context.Background())
		if loadErr == nil {
			out, err = project.MarshalJSON()
			if err == nil {
				os.Stdout.Write(out)
				return
			}
		} else {
			err = loadErr
		}
	}
	fmt.Fprintln(os.Stderr, err)
	os.Exit(1)
}
