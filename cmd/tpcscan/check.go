package main

import (
	"context"
	"fmt"
)

func checkCommand() command {
	return command{
		name:    "check",
		summary: "validate a dataset and print a summary (events, planes, sizes, problems)",
		run: func(ctx context.Context, env *environ, args []string) error {
			fs := newFlags(env, "check", "DATASET", "Reads every event of the dataset folder and reports each problem with the file and event it is in.\nExits non-zero when any problem is found.")
			if err := fs.Parse(args); err != nil {
				return err
			}
			if fs.NArg() != 1 {
				return usageError{"check needs one DATASET folder"}
			}
			return fmt.Errorf("check %s: dataset reader not implemented yet", fs.Arg(0))
		},
	}
}
