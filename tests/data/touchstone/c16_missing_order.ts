! Edge case 16: a 2-port without [Two-Port Data Order] (must fail)
[Version] 2.0
# GHz S RI R 50
[Number of Ports] 2
[Number of Frequencies] 2
[Network Data]
1.0  0.1 0  0.2 0  0.3 0  0.4 0
2.0  0.1 0  0.2 0  0.3 0  0.4 0
[End]
