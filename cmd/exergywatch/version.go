package main

import (
	"fmt"
	"io"
	"runtime"
	"runtime/debug"
)

// version is set at link time with -ldflags "-X main.version=v1.2.3";
// otherwise the module build information is used.
var version = ""

func init() {
	register("version", "print the version of this binary", func(args []string, stdout, stderr io.Writer) int {
		if len(args) > 0 {
			fmt.Fprintln(stderr, "exergywatch version: takes no arguments")
			return 2
		}
		fmt.Fprintf(stdout, "exergywatch %s (%s, %s/%s)\n", buildVersion(), runtime.Version(), runtime.GOOS, runtime.GOARCH)
		return 0
	})
}

func buildVersion() string {
	if version != "" {
		return version
	}
	v := "devel"
	if bi, ok := debug.ReadBuildInfo(); ok {
		if bi.Main.Version != "" && bi.Main.Version != "(devel)" {
			v = bi.Main.Version
		}
		for _, s := range bi.Settings {
			if s.Key == "vcs.revision" && len(s.Value) >= 12 {
				v += "+" + s.Value[:12]
			}
		}
	}
	return v
}
