! Edge case 18: information block and mixed-mode order
[Version] 2.1
# GHz S RI R 50
[Number of Ports] 4
[Number of Frequencies] 1
[Begin Information]
free text the reader skips, even [Number of Ports] 9 or # MHz
[End Information]
[Mixed-Mode Order] D1,2 D3,4 C1,2 C3,4
[Network Data]
1.0  0.1 0  0.2 0  0.3 0  0.4 0
     0.2 0  0.1 0  0.4 0  0.3 0
     0.3 0  0.4 0  0.1 0  0.2 0
     0.4 0  0.3 0  0.2 0  0.1 0
[End]
