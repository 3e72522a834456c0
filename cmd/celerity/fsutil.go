package main

import "os"

func os_MkdirAll(dir string) error { return os.MkdirAll(dir, 0o755) }
