package main

import (
	"encoding/json"
	"fmt"

	"github.com/spf13/cobra"

	"muarc/convert"
	"muarc/schema"
)

func init() {
	var layout, asJSON, example bool
	cmd := &cobra.Command{
		Use:   "schema [--layout | --example]",
		Short: "Print the JSON Schema of the metadata view, the layout specification, or an example sidecar",
		Long: `schema prints the JSON Schema (draft-07) that a recording's metadata view
and a metadata sidecar must satisfy; with --layout it prints the layout
specification (LAYOUT.md) instead. Both are built into the binary.

With --example it prints a complete metadata sidecar to start from: save it
as metadata.json beside a recording's files, change the values, delete the
members you do not know, and run muarc import (see muarc import --help and
convert/PROFILES.md).

  muarc schema --example > P01/metadata.json`,
		Args: cobra.NoArgs,
		RunE: func(cmd *cobra.Command, _ []string) error {
			out := cmd.OutOrStdout()
			switch {
			case example && layout:
				return withExit(2, fmt.Errorf("give --example or --layout, not both"))
			case example:
				_, err := out.Write(convert.ExampleSidecar)
				return err
			case layout && asJSON:
				return printJSON(out, map[string]string{"layout_version": schema.LayoutVersion, "layout": schema.Layout})
			case layout:
				_, err := fmt.Fprint(out, schema.Layout)
				return err
			case asJSON:
				var v any
				if err := json.Unmarshal([]byte(schema.RecordingSchema), &v); err != nil {
					return err
				}
				return printJSON(out, v)
			}
			_, err := fmt.Fprint(out, schema.RecordingSchema)
			return err
		},
	}
	cmd.Flags().BoolVar(&layout, "layout", false, "print the layout specification (Markdown) instead of the JSON Schema")
	cmd.Flags().BoolVar(&example, "example", false, "print a complete metadata sidecar (JSON) to start from")
	cmd.Flags().BoolVar(&asJSON, "json", false, "machine output: the schema re-indented, or the layout wrapped in a JSON object")
	rootCmd.AddCommand(cmd)
}
