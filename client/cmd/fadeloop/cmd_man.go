package main

import (
	"fmt"
	"os"

	"github.com/spf13/cobra"
	"github.com/spf13/cobra/doc"
)

// newManCommand writes one man page (section 1) per command into a
// directory, made with cobra's doc package (go-md2man).
func newManCommand(root *cobra.Command) *cobra.Command {
	return &cobra.Command{
		Use:   "man [flags] DIR",
		Short: "write the man pages (section 1) into a directory",
		Long: `Writes one man page per command (fadeloop.1, fadeloop-run.1, ...) into
DIR, creating it if needed.

Examples:
  fadeloop man ./man1
  man -l ./man1/fadeloop-run.1`,
		RunE: func(c *cobra.Command, args []string) error {
			if len(args) != 1 {
				return badInputf("give one directory, got %d arguments", len(args))
			}
			dir := args[0]
			if err := os.MkdirAll(dir, 0o755); err != nil {
				return badInputf("%s: %v", dir, err)
			}
			root.DisableAutoGenTag = true
			hdr := &doc.GenManHeader{Title: "FADELOOP", Section: "1", Source: "fadeloop " + versionString(), Manual: "fadeloop manual"}
			if err := doc.GenManTree(root, hdr, dir); err != nil {
				return err
			}
			fmt.Fprintf(c.ErrOrStderr(), "wrote man pages to %s\n", dir)
			return nil
		},
	}
}
