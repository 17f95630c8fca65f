# bench/lib.sh: what the bench scripts share (sourced, not run).

# replace_section HEADING TEXT: TEXT takes the place of the section of
# bench/results.md that starts with the line HEADING... (up to the next
# "## " heading), or is appended; the other scripts' sections stay, in
# whatever order the scripts ran.
replace_section() {
	local heading=$1 text=$2 rest
	rest=$(mktemp)
	touch bench/results.md
	awk -v h="$heading" 'index($0, h) == 1 { skip = 1; next } skip && /^## / { skip = 0 } !skip { print }' bench/results.md >"$rest"
	{
		cat "$rest"
		if [ -n "$(tail -n 1 "$rest")" ]; then echo; fi
		printf '%s\n' "$text"
	} >bench/results.md
	rm -f "$rest"
}

# keep_sections HEAD: HEAD (the main table with its own sections: chunk
# length, file format) takes the place of the head of bench/results.md;
# the sections the other scripts wrote stay after it.
keep_sections() {
	local head=$1 rest
	rest=$(mktemp)
	touch bench/results.md
	awk '/^## / && !/^## (Chunk length|HDF5 file format)/ { keep = 1 } keep { print }' bench/results.md >"$rest"
	{
		cat "$head"
		if [ -s "$rest" ]; then echo; cat "$rest"; fi
	} >bench/results.md
	rm -f "$rest"
}
