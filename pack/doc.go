// Package pack makes deposit bundles: deposit.yaml (LoadDeposit, checked
// by its JSON Schema), the bag payload with provenance, the data description
// (README.md with plots and the audit summary), DataCite and RO-Crate
// metadata, and the BagIt bag itself (WriteBundle), split into bag groups
// when the payload is large.
package pack
