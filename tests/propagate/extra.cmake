# Critical points of tanh networks checked live against scipy (Debian python3-scipy,
# /usr/bin/python3): a tiny program prints kindling's critical sigma_w^2 and q* for
# several sigma_b^2, and tests/propagate/check_critical.py recomputes them with
# scipy.integrate.quad and scipy.optimize.brentq.
kindling_reference_check(
  AREA propagate PROGRAM kindling_propagate_print
  SOURCE reference/print_critical.cpp SCRIPT check_critical.py
  NAME "propagate: tanh critical points match scipy quad and brentq")

# (The measured pass needs Eigen: kindling_eigen, present whenever this area is built.)
# Convolution passes checked against NumPy (Debian python3-numpy, /usr/bin/python3): the
# printer exports draw 0 of four convolution stacks (weights, biases, inputs, output
# gradients as .npy, and kindling's measured moments), and check_convolution.py redoes
# the forward and backward passes with numpy.pad, strided slices and numpy.einsum.
kindling_reference_check(
  AREA propagate PROGRAM kindling_propagate_print_convolution
  SOURCE reference/print_convolution.cpp SCRIPT check_convolution.py
  NAME "propagate: convolution passes match a NumPy computation from the same weights")
target_link_libraries(kindling_propagate_print_convolution PRIVATE kindling_eigen)

# Recurrent cells checked against NumPy (Debian python3-numpy, /usr/bin/python3): the
# printer exports draw 0 of an LSTM and a GRU over 50 steps (weights, bias, inputs, loss
# gradient as .npy, and kindling's per-step moments), and check_recurrent.py unrolls the
# same cells with numpy matrix products, forward and back through time.
kindling_reference_check(
  AREA propagate PROGRAM kindling_propagate_print_recurrent
  SOURCE reference/print_recurrent.cpp SCRIPT check_recurrent.py
  NAME "propagate: recurrent cells over 50 steps match a NumPy unrolling from the same weights")
target_link_libraries(kindling_propagate_print_recurrent PRIVATE kindling_eigen)

# Attention blocks checked against NumPy (Debian python3-numpy, /usr/bin/python3): the
# printer exports draw 0 of three blocks (one head, four heads, a saturated softmax):
# the four projections and the inputs as .npy, and kindling's measured moments; and
# check_attention.py redoes the forward pass with numpy.einsum and a softmax over keys.
kindling_reference_check(
  AREA propagate PROGRAM kindling_propagate_print_attention
  SOURCE reference/print_attention.cpp SCRIPT check_attention.py
  NAME "propagate: attention passes match a NumPy computation from the same weights")
target_link_libraries(kindling_propagate_print_attention PRIVATE kindling_eigen)
