// Package demo is sparsegate's embedded demo: the Quillmere Coast Post, an
// invented coastal courier network (generator in suites/demo/gen), its
// held-out texts and probe items (data/), and a small OPT-family model trained
// on its paperwork (model/, with its model card).
package demo
