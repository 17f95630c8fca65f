package main

import (
	"bufio"
	"errors"
	"fmt"
	"os"
	"strings"

	"github.com/spf13/cobra"

	"trajvault/internal/finding"
	"trajvault/pack"
)

type initOptions struct {
	out      string
	check    bool
	json     bool
	title    string
	desc     string
	license  string
	creators []string
	contact  string
	method   string
	program  string
}

func (o *initOptions) AddFlags(c *cobra.Command) {
	c.Flags().StringVarP(&o.out, "output", "o", "deposit.yaml", "file to write (must not exist)")
	c.Flags().BoolVar(&o.check, "check", false, "check an existing deposit.yaml instead of writing one")
	c.Flags().BoolVar(&o.json, "json", false, "print the result as one JSON document (tool, command, findings, result)")
	c.Flags().StringVar(&o.title, "title", "", "title")
	c.Flags().StringVar(&o.desc, "description", "", "description: what was simulated, why, and what the files hold")
	c.Flags().StringVar(&o.license, "license", "CC-BY-4.0", "SPDX licence identifier (CC-BY-4.0 suggested, or CC0-1.0)")
	c.Flags().StringArrayVar(&o.creators, "creator", nil, "creator as \"Family, Given|ORCID|Affiliation\" (repeatable; ORCID and affiliation optional)")
	c.Flags().StringVar(&o.contact, "contact", "", "contact as \"Name|email\"")
	c.Flags().StringVar(&o.method, "method", "fewest-switches surface hopping", "dynamics method")
	c.Flags().StringVar(&o.program, "program", "", "simulation program as \"name|version\"")
}

func newInitCommand(g *globals) *cobra.Command {
	var o initOptions
	c := &cobra.Command{
		Use:   "init [FILE]",
		Short: "Write a commented deposit.yaml template, or check one",
		Long: `init writes deposit.yaml, the description of a deposit that pack turns into
RO-Crate and DataCite metadata and the data description: title, description,
licence (SPDX), creators with ORCID and affiliation, funding, and the
simulation record (method, electronic structure, states, time step,
initial conditions, program and version). Fill in what the flags did not.
Fields left at the template's placeholders (title, description, creator,
contact e-mail, program and version) are refused by --check and by pack,
so that no placeholder is ever published; the licence must be an SPDX
License List identifier. With --check it validates an existing file and
names every field that is wrong and what is expected.

Exit status: 0 success (or a valid file), 1 the file has problems,
2 usage or I/O error.`,
		Example: "  trajvault init --title \"Photodissociation of tarnol\" \\\n    --creator \"Doe, Jane|0000-0002-1825-0097|Tarn Valley University\"\n  trajvault init --check deposit.yaml",
		Args:    cobra.MaximumNArgs(1),
		PreRunE: func(c *cobra.Command, args []string) error {
			if len(args) == 1 {
				if c.Flags().Changed("output") && o.out != args[0] {
					return &exitError{exitUsage, fmt.Errorf("init: give the file once, as FILE or with -o (got %s and %s)", args[0], o.out)}
				}
				o.out = args[0]
			}
			return nil
		},
		RunE: func(c *cobra.Command, args []string) error {
			if !o.check && !c.Flags().Changed("title") && isTerminal(os.Stdin) && isTerminal(os.Stdout) {
				prompt(&o)
			}
			return runInit(g, o)
		},
	}
	o.AddFlags(c)
	return c
}

func runInit(g *globals, o initOptions) error {
	result := map[string]string{"file": o.out}
	if o.check {
		if _, err := pack.LoadDeposit(o.out); err != nil {
			var de *pack.DepositError
			if !errors.As(err, &de) {
				return &exitError{exitUsage, fmt.Errorf("init: %w", err)}
			}
			if o.json {
				printEnvelope(g, "init --check", de.Findings, result)
			} else {
				fmt.Fprintln(g.stdout, de.Error())
			}
			return errFindings
		}
		if o.json {
			return printEnvelope(g, "init --check", nil, result)
		}
		fmt.Fprintf(g.stdout, "%s: ok\n", o.out)
		return nil
	}
	if _, err := os.Stat(o.out); err == nil {
		return &exitError{exitUsage, fmt.Errorf("init: %s already exists; check it with --check, or choose -o", o.out)}
	}
	f := pack.DepositFields{Title: o.title, Description: o.desc, License: o.license, Method: o.method}
	for _, c := range o.creators {
		p := strings.Split(c, "|")
		cr := pack.Creator{Name: strings.TrimSpace(p[0])}
		if len(p) > 1 {
			cr.ORCID = strings.TrimSpace(p[1])
		}
		if len(p) > 2 {
			cr.Affiliation = strings.TrimSpace(p[2])
		}
		f.Creators = append(f.Creators, cr)
	}
	if o.contact != "" {
		p := strings.SplitN(o.contact, "|", 2)
		f.Contact.Name = strings.TrimSpace(p[0])
		if len(p) > 1 {
			f.Contact.Email = strings.TrimSpace(p[1])
		}
	}
	pn := strings.SplitN(o.program, "|", 2)
	f.Program.Name = strings.TrimSpace(pn[0])
	if len(pn) > 1 {
		f.Program.Version = strings.TrimSpace(pn[1])
	}
	text, err := pack.RenderDeposit(f)
	if err != nil {
		return &exitError{exitUsage, fmt.Errorf("init: %w", err)}
	}
	if err := writeAtomically(o.out, func(w *os.File) error { _, err := w.Write(text); return err }); err != nil {
		return &exitError{exitUsage, fmt.Errorf("init: %w", err)}
	}
	// What is still to fill in: findings of the new file, as warnings
	// (writing it succeeded; init --check and pack refuse them).
	var todo []finding.Finding
	_, err = pack.LoadDeposit(o.out)
	if de := (*pack.DepositError)(nil); errors.As(err, &de) {
		for _, f := range de.Findings {
			f.Severity = finding.Warning
			todo = append(todo, f)
		}
	}
	if o.json {
		return printEnvelope(g, "init", todo, result)
	}
	fmt.Fprintf(g.stdout, "wrote %s; fill in the rest, then: trajvault init --check %s\n", o.out, o.out)
	if err != nil {
		fmt.Fprintln(g.stdout, err)
	}
	return nil
}

// prompt asks for the main fields on a terminal; Enter keeps the default.
func prompt(o *initOptions) {
	in := bufio.NewReader(os.Stdin)
	ask := func(q string, v *string) {
		fmt.Printf("%s [%s]: ", q, *v)
		line, _ := in.ReadString('\n')
		if s := strings.TrimSpace(line); s != "" {
			*v = s
		}
	}
	ask("Title", &o.title)
	ask("Description", &o.desc)
	ask("Licence (SPDX)", &o.license)
	creator := "Family, Given|ORCID|Affiliation"
	ask("Creator", &creator)
	if creator != "Family, Given|ORCID|Affiliation" {
		o.creators = append(o.creators, creator)
	}
	ask("Simulation method", &o.method)
	ask("Program|version", &o.program)
}
