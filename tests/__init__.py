"""The test suite (a package, so that its helper modules, e.g. tests.http, never shadow the standard library)."""
