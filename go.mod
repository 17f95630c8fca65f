module trajvault

go 1.26.8

require gonum.org/v1/hdf5 v0.0.0-20210714002203-8c5d23bc6946

require github.com/santhosh-tekuri/jsonschema/v5 v5.3.1 // indirect
