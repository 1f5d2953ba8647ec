# The model lists for the end-to-end tests (sourced, not run: tests/run-all runs tests/e2e/*.sh
# only). A test that loops over the models or checks a list of them takes it from here rather than
# spelling it, so that a model added to the table (src/model/registry.c) is tested, and no test
# breaks, without editing the test (DEVELOPERS.md, "Adding a growth model").
#
# The lists come from the program itself: the hint of the model layer's error for an unknown name
# (src/model/model.c, "known growth models: a, b, ..."), which prints the table in its order.
# Needs $T, the binary under test.

# tf_model_list growth|observation: the names, one per line, in the table's order; a message and
# status 1 when the program does not give them. Use as: growth=$(tf_model_list growth) || exit 1
tf_model_list() {
  local kind=$1 args line
  case $kind in
    growth) args=(--model .) ;;
    observation) args=(--model "$(tf_model_list growth | head -n 1)" --obs .) ;;
    *) echo "tf_model_list: growth or observation, not '$kind'" >&2; return 1 ;;
  esac
  line=$("$T" likelihood /dev/null "${args[@]}" --parameter r=1 2>&1 >/dev/null |
         sed -n "s/^  hint: known $kind models: //p") || true  # the run itself fails, on purpose
  if [ -z "$line" ]; then
    echo "tf_model_list: '$T likelihood' gave no list of $kind models" >&2
    return 1
  fi
  tr -d ' ' <<<"$line" | tr ',' '\n'
}
