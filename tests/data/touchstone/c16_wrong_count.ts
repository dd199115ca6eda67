! Edge case 16: [Number of Frequencies] disagrees with the data (must fail)
[Version] 2.0
# GHz S RI R 50
[Number of Ports] 2
[Two-Port Data Order] 12_21
[Number of Frequencies] 3
[Network Data]
1.0  0.1 0  0.2 0  0.3 0  0.4 0
2.0  0.1 0  0.2 0  0.3 0  0.4 0
[End]
