#!/usr/bin/env bash
{{directives}}
# ratchet batch script, Slurm backend: submitted with `sbatch run.sh` from the task directory
# (directives above come from the stage's resources; sbatch reads them up to the first command).
# Reproduce the task by hand with `bash run.sh` (move exit.json aside first: a task with an exit
# record never runs again).
