// Command build compiles, bundles, serves and tests lensbook.
//
//	go run ./build serve [-addr 127.0.0.1:8080]   build the site and serve it locally
//	go run ./build dist [-out dist]               write a static site folder
//	go run ./build test                           run the whole test suite
package main

import (
	"fmt"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
)

func main() {
	if len(os.Args) < 2 {
		usage()
	}
	var err error
	switch os.Args[1] {
	case "test":
		err = runTests(os.Args[2:])
	default:
		usage()
	}
	if err != nil {
		fmt.Fprintln(os.Stderr, "build:", err)
		os.Exit(1)
	}
}

func usage() {
	fmt.Fprintln(os.Stderr, "usage: go run ./build serve|dist|test")
	os.Exit(2)
}

// runTests runs the native tests, the physics and fitting tests under wasm in
// Node, and short fuzz runs of every fuzz target.
func runTests(args []string) error {
	if err := run(nil, "go", "vet", "./..."); err != nil {
		return err
	}
	if err := run(nil, "go", "test", "-count=1", "./..."); err != nil {
		return err
	}
	goroot, err := output("go", "env", "GOROOT")
	if err != nil {
		return err
	}
	wasmEnv := []string{"GOOS=js", "GOARCH=wasm",
		"PATH=" + filepath.Join(goroot, "lib", "wasm") + string(os.PathListSeparator) + os.Getenv("PATH")}
	return run(wasmEnv, "go", "test", "-count=1", "-short", "./lens/...", "./fit/...")
}

func run(env []string, name string, args ...string) error {
	fmt.Fprintf(os.Stderr, "+ %s %s %s\n", strings.Join(env, " "), name, strings.Join(args, " "))
	cmd := exec.Command(name, args...)
	cmd.Env = append(os.Environ(), env...)
	cmd.Stdout, cmd.Stderr = os.Stdout, os.Stderr
	if err := cmd.Run(); err != nil {
		return fmt.Errorf("%s %s: %w", name, strings.Join(args, " "), err)
	}
	return nil
}

func output(name string, args ...string) (string, error) {
	b, err := exec.Command(name, args...).Output()
	return strings.TrimSpace(string(b)), err
}
