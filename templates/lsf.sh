#!/bin/bash
{{directives}}
# ratchet batch script, LSF backend: submitted with `bsub < run.sh` from the task directory
# (bsub reads #BSUB lines only from a script given on standard input).
# Reproduce the task by hand with `bash run.sh` (move exit.json aside first: a task with an exit
# record never runs again).
