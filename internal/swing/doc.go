// Package swing finds the swings in a capture's kinematics (doc in progress).
package swing
