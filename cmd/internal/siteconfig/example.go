package siteconfig

import _ "embed"

// ExampleYAML is a documented, valid site file for an invented warehouse
// ("hewline config example" prints it).
//
//go:embed example.yaml
var ExampleYAML string
