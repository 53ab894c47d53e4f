package main

func runServe(e *env, args []string) error { return usagef("not yet") }
func runToken(e *env, args []string) error { return usagef("not yet") }
