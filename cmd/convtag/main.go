// Command convtag tags every line of a text or JSON Lines stream by
// category with a small convolutional network, and trains, evaluates and
// inspects the models it uses. See README.md.
package main

import "os"

func main() { os.Exit(run(os.Args[1:], os.Stdin, os.Stdout, os.Stderr)) }
