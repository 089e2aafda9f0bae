#!/bin/bash
{{directives}}
# ratchet batch script, Grid Engine backend: submitted with `qsub -terse run.sh` from the task
# directory. Reproduce the task by hand with `bash run.sh` (move exit.json aside first: a task with
# an exit record never runs again).
