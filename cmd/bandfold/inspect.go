package main

import (
	"github.com/spf13/cobra"

	"bandfold/transform"
)

func newInspectCommand(g *globals) *cobra.Command {
	return &cobra.Command{
		Use:     "inspect BASIS",
		Short:   "Print the variance table of a saved basis",
		Example: `  bandfold inspect cube.basis.json --json`,
		Args:    cobra.ExactArgs(1),
		RunE: func(cmd *cobra.Command, args []string) error {
			b, err := transform.ReadBasis(args[0])
			if err != nil {
				return err
			}
			return reportBasis(g, b, args[0])
		},
	}
}
