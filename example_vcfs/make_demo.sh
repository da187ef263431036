#!/usr/bin/env bash
# Make the demo study of example_vcfs/ with 'driftband simulate' (invented data, fixed seed).
#
# The imaginary freshwater snail Limnofictus vitreus lives in a large lake (N = 2000) and in
# a small, isolated spring (N = 300, about 7 times fewer); both share one distribution of
# selection coefficients s (gamma, shape 0.3, mean |S| = 400 on the lake's scale, so a mean
# |Ne*s| of 100 in the lake and 15 in the spring). Four snails of the sister species
# L. alter serve as outgroup. Sampled: 16 lake snails, 14 spring snails, 4 outgroup snails.
# The simulation's truth (shares of new 0-fold mutations per |Ne*s| band) is kept in
# snail.truth.spectra.json (provenance.simulation.populations.*.nes_band_shares).
#
# Usage, from anywhere, with driftband installed:   bash example_vcfs/make_demo.sh
# Takes about 5 minutes; the output is the same on every run. Nothing here is real data.
set -euo pipefail
cd "$(dirname "$0")"

driftband simulate \
    --population lake:N=2000,n=32 --population spring:N=300,n=28 \
    --true-dfe gamma:shape=0.3,mean=400 --theta 0.02 \
    --class-sites-0fold 300000 --class-sites-4fold 150000 --block-count 60 \
    --chromosomes 3 --gene-codons 400 --intergenic 4000 \
    --burn-in 20000 --divergence-generations 4000 \
    --outgroup sister:n=8 --missing 0.02 --ref-derived 0.03 \
    --write-vcf snail --genome --seed 2024 -o snail.truth.spectra.json --force

# The reference, bgzip-compressed with its indexes (.fai, .gzi), so that an installed,
# read-only copy needs no indexing.
rm -f snail.fa.gz snail.fa.gz.fai snail.fa.gz.gzi
bgzip -i -f snail.fa
python -c 'import pysam; pysam.faidx("snail.fa.gz")'
rm -f snail.fa.fai

# Classifying the reference must give back the simulated site classes; the 7 MB BED is
# then left out ('driftband run' makes it again from the FASTA + GFF3).
tmp=$(mktemp -d)
trap 'rm -rf "$tmp"' EXIT
driftband classify --fasta snail.fa.gz --gff snail.gff3 -o "$tmp/sites.bed" -q
cmp "$tmp/sites.bed" snail.sites.bed
rm -f snail.sites.bed

# Indexes no older than their data files.
touch snail.vcf.gz.tbi snail.fa.gz.fai snail.fa.gz.gzi
ls -l snail.*
