// Package pack turns a folder of legacy text logs into a deposit: it reads
// XYZ, extended XYZ, column tables and recipe-described logs, writes
// trajectory files in the trajvault layout (internal/trajfile) and, with
// provenance, the BagIt bag, RO-Crate and DataCite metadata.
//
// Status: the readers and the bag are the next issues; today the package
// only fixes its place in the dependency order
// (cmd -> pack/validate -> schema/provenance -> internal).
package pack
